"""Raw test databases written to ``tmp_path``: nasa7 records, table-csv, species-csv.

The nasa7 lines are formatted here from the column map of inputs.md (NASA TM-4513
classic layout), independently of the project's exporter, so a test of the exporter is
not a test of itself.

Model species (ideal gases, rigid rotor + harmonic oscillator in spirit, with simple
polynomial Cp): each record's constants b1, b2 are set so that H(298.15) and S(298.15)
equal the CODATA key values (Cox, Wagman & Medvedev, *CODATA Key Values for
Thermodynamics*, Hemisphere, 1989): H2(g) S° = 130.680 J/(mol·K); O2(g) S° = 205.152;
H2O(g) ΔfH° = −241.826 kJ/mol, S° = 188.835; N2(g) S° = 191.609 (values from memory of
that table).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from pipeline.constants import R, T_REF

CODATA = {  # ΔfH° [J/mol], S° [J/(mol*K)] at 298.15 K, 1 bar (Cox, Wagman & Medvedev 1989; from memory)
    "H2(g)": (0.0, 130.680), "O2(g)": (0.0, 205.152), "H2O(g)": (-241826.0, 188.835), "N2(g)": (0.0, 191.609),
}
#: Cp/R = c1 + c2 T + c3 T² (model values of the right magnitude, not data)
CP_MODEL = {"H2(g)": (3.30, 5.0e-5, 0.0), "O2(g)": (3.40, 1.0e-4, -5.0e-9), "H2O(g)": (3.80, 2.0e-4, 1.0e-8)}
ELEMENTS = {"H2(g)": {"H": 2}, "O2(g)": {"O": 2}, "H2O(g)": {"H": 2, "O": 1}, "N2(g)": {"N": 2}}


def nasa7_coefficients(c, h298, s298):
    """NASA-7 (7,) with Cp/R = c1 + c2 T + c3 T², H(298.15) = h298, S(298.15) = s298."""
    c1, c2, c3 = c
    t = T_REF
    a6 = h298 / R - (c1 * t + c2 * t ** 2 / 2 + c3 * t ** 3 / 3)
    a7 = s298 / R - (c1 * np.log(t) + c2 * t + c3 * t ** 2 / 2)
    return np.array([c1, c2, c3, 0.0, 0.0, a6, a7])


def _e15(x: float) -> str:
    return f"{x:15.8E}"


def nasa7_record(name, elements, phase, t_low, t_mid, t_high, upper, lower, date="TEST"):
    """Four 80-column lines (inputs.md: name 1-18, date 19-24, 4 × (A2, I3) 25-44, phase 45,
    T_low 46-55, T_high 56-65, T_common 66-73, line number in column 80)."""
    formula = "".join(f"{el.upper():<2}{int(n):3d}" for el, n in elements.items())
    l1 = f"{name:<18}{date:<6}{formula:<20}{phase}{t_low:10.3f}{t_high:10.3f}{t_mid:8.3f}" + " " * 6 + "1"
    c = list(upper) + list(lower)
    l2 = "".join(_e15(x) for x in c[0:5]) + "    2"
    l3 = "".join(_e15(x) for x in c[5:10]) + "    3"
    l4 = "".join(_e15(x) for x in c[10:14]) + " " * 19 + "4"
    assert all(len(x) == 80 for x in (l1, l2, l3, l4))
    return "\n".join([l1, l2, l3, l4])


def model_nasa7(key: str, *, dh: float = 0.0, t_low=200.0, t_mid=1000.0, t_high=5000.0, cp_scale=1.0):
    """nasa7 text of a model species; ``dh`` shifts H(298.15) [J/mol], ``cp_scale`` scales Cp."""
    h298, s298 = CODATA[key]
    c = tuple(cp_scale * x for x in CP_MODEL[key])
    coef = nasa7_coefficients(c, h298 + dh, s298)
    return nasa7_record(key.split("(")[0].upper(), ELEMENTS[key], "G", t_low, t_mid, t_high, coef, coef)


def n2_einstein(t):
    """N2(g) model: Cp = 7/2 R + R E(θ/T), Einstein vibration θ = 3390 K (order of N2's
    vibrational temperature, from memory); returns Cp, H − H298, S with S(298.15) = CODATA."""
    theta = 3390.0
    t = np.asarray(t, float)

    def parts(tt):
        x = theta / tt
        cpv = x ** 2 * np.exp(x) / np.expm1(x) ** 2
        hv = theta / np.expm1(x)
        sv = x / np.expm1(x) - np.log1p(-np.exp(-x))
        return cpv, hv, sv

    cpv, hv, sv = parts(t)
    _, hv0, sv0 = parts(np.array(T_REF))
    cp = R * (3.5 + cpv)
    hmh = R * (3.5 * (t - T_REF) + hv - hv0)
    s = CODATA["N2(g)"][1] + R * (3.5 * np.log(t / T_REF) + sv - sv0)
    return cp, hmh, s


def table_csv(rows: dict[str, tuple]) -> str:
    """table-csv text (SI units in the header brackets); rows: key → (t, cp, hmh, s, dfh|None)."""
    out = ["species,t [K],cp [J/(mol*K)],h_minus_href [J/mol],s [J/(mol*K)],dfh [J/mol]"]
    for key, (t, cp, hmh, s, dfh) in rows.items():
        for i in range(len(t)):
            d = "" if dfh is None or not np.isclose(t[i], T_REF) else repr(float(dfh))
            out.append(f"\"{key}\",{float(t[i])!r},{float(cp[i])!r},{float(hmh[i])!r},{float(s[i])!r},{d}")
    return "\n".join(out) + "\n"


def write_raw(raw: Path, *, nasa7: dict[str, str], tables: str | None = None, species_csv: str | None = None,
              priorities: dict[str, int] | None = None) -> Path:
    """A raw folder: one nasa7 source per entry of ``nasa7`` (id → text), optional table-csv
    and species-csv; returns ``raw``."""
    raw.mkdir(parents=True, exist_ok=True)
    toml = ['[database]', 'name = "test database"', '']
    for sid, text in nasa7.items():
        (raw / f"{sid}.nasa7").write_text("THERMO\n   200.000  1000.000  5000.000\n" + text + "\nEND\n")
        toml += ['[[source]]', f'id = "{sid}"', f'path = "{sid}.nasa7"', 'format = "nasa7"',
                 f'priority = {(priorities or {}).get(sid, 0)}', 'citation = "synthetic test data"', '']
    if tables is not None:
        (raw / "tables.csv").write_text(tables)
        toml += ['[[source]]', 'id = "tables"', 'path = "tables.csv"', 'format = "table-csv"',
                 f'priority = {(priorities or {}).get("tables", 0)}', 'citation = "synthetic test table"', '']
    if species_csv is not None:
        (raw / "species.csv").write_text(species_csv)
        toml += ['[[source]]', 'id = "species"', 'path = "species.csv"', 'format = "species-csv"', '']
    (raw / "sources.toml").write_text("\n".join(toml))
    return raw


def standard_raw(raw: Path, *, extra_nasa7: dict[str, str] | None = None) -> Path:
    """H2, O2, H2O in nasa7 (two sources for H2O), N2 tabulated only (300–3000 K)."""
    t = np.concatenate([[T_REF], np.arange(300.0, 3001.0, 50.0)])
    cp, hmh, s = n2_einstein(t)
    srcs = {"main": "\n".join(model_nasa7(k) for k in ("H2(g)", "O2(g)", "H2O(g)")),
            "alt": model_nasa7("H2O(g)", dh=500.0)}
    srcs.update(extra_nasa7 or {})
    species = ("species,aliases,molar_mass_g_mol,reference_element,geometry,cas\n"
               "H2(g),,,true,linear,\nO2(g),,,true,linear,\nN2(g),,,true,linear,\nH2O(g),,,false,nonlinear,\n")
    return write_raw(raw, nasa7=srcs, tables=table_csv({"N2(g)": (t, cp, hmh, s, 0.0)}),
                     species_csv=species, priorities={"main": 10, "alt": 5})


def build_release(raw: Path, out: Path):
    """Run the whole pipeline in-process on ``raw`` into ``out``; returns the Run."""
    from pipeline.stages import Run, execute

    return execute(Run(raw=raw, out=out))
