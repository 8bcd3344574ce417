"""A tiny raw folder of NASA 7-term records, written in the fixed-column layout that
``pipeline/ingest/nasa7.py`` reads (NASA TM-4513, 1993: four 80-column lines per species).

The records are simple by construction (Cp/R constant or linear in T per segment) so the
defects planted in them are unambiguous:

* ``O2`` in ``alpha``: the upper segment's Cp/R is 3.6 against 3.5 below the 1000 K joint,
  a 2.8 % jump → ``segment.discontinuity`` (error beyond 0.5 %, checks.md);
* ``CO`` in ``alpha``: lower-segment Cp/R = 3.5 − 0.004 T turns negative above 875 K →
  ``cp.nonpositive`` (error), and it does not meet its upper segment either;
* ``H2`` in ``beta``: Cp/R 3.55 above the joint against 3.5 below (1.4 %) →
  ``segment.discontinuity``, so that two sources carry findings;
* everything else is continuous (both segments carry the same coefficients).

H(298.15) and S(298.15) are set to plausible values (ΔfH°, S° of the gases, from memory)
only so that the plots look like thermochemistry; no test asserts them.
"""
from __future__ import annotations

import json
import random
import subprocess
import sys
from pathlib import Path

import numpy as np

R = 8.314462618  # J/(mol*K), CODATA 2018 (exact)
T_REF = 298.15


def _coeffs(cp_a1: float, cp_a2: float, dfh_j_mol: float, s298_j_mol_k: float) -> list[float]:
    """NASA-7 coefficients for Cp/R = cp_a1 + cp_a2 T with H(298.15) and S(298.15) as given."""
    a6 = dfh_j_mol / R - (cp_a1 * T_REF + cp_a2 * T_REF ** 2 / 2)
    a7 = s298_j_mol_k / R - (cp_a1 * np.log(T_REF) + cp_a2 * T_REF)
    return [cp_a1, cp_a2, 0.0, 0.0, 0.0, a6, a7]


def nasa7_record(name: str, elements: dict[str, int], upper: list[float], lower: list[float],
                 t_low: float = 200.0, t_mid: float = 1000.0, t_high: float = 3500.0) -> str:
    """Four 80-column lines of one species (column 80 holds the line number)."""
    el = "".join(f"{s:<2}{n:>3d}" for s, n in elements.items()).ljust(20)
    l1 = f"{name:<18}{'TEST':<6}{el}G{t_low:10.3f}{t_high:10.3f}{t_mid:8.2f}".ljust(79) + "1"
    f = lambda xs: "".join(f"{x:15.8E}" for x in xs)  # noqa: E731
    l2 = f(upper[0:5]).ljust(79) + "2"
    l3 = (f(upper[5:7]) + f(lower[0:3])).ljust(79) + "3"
    l4 = f(lower[3:7]).ljust(79) + "4"
    return "\n".join((l1, l2, l3, l4))


#: source → list of (name, elements, upper, lower)
SPECIES = {
    "alpha": [
        ("N2", {"N": 2}, _coeffs(3.5, 0, 0, 191.6), _coeffs(3.5, 0, 0, 191.6)),
        ("O2", {"O": 2}, _coeffs(3.6, 0, 0, 205.15), _coeffs(3.5, 0, 0, 205.15)),
        ("CO", {"C": 1, "O": 1}, _coeffs(3.5, 0, -110530, 197.66), _coeffs(3.5, -0.004, -110530, 197.66)),
        ("AR", {"AR": 1}, _coeffs(2.5, 0, 0, 154.85), _coeffs(2.5, 0, 0, 154.85)),
    ],
    "beta": [
        ("N2", {"N": 2}, _coeffs(3.52, 0, 0, 191.6), _coeffs(3.52, 0, 0, 191.6)),
        ("O2", {"O": 2}, _coeffs(3.5, 0, 0, 205.15), _coeffs(3.5, 0, 0, 205.15)),
        ("H2", {"H": 2}, _coeffs(3.55, 0, 0, 130.68), _coeffs(3.5, 0, 0, 130.68)),
    ],
}


def write_raw(folder: Path, *, seed: int | None = None, reverse_sources: bool = False) -> Path:
    """Write ``sources.toml`` and one nasa7 file per source into ``folder``.

    ``seed`` shuffles the records inside each file; ``reverse_sources`` lists the sources in
    the manifest in the opposite order. The content (species, coefficients) never changes.
    """
    folder.mkdir(parents=True, exist_ok=True)
    ids = list(SPECIES)
    if reverse_sources:
        ids.reverse()
    manifest = ['[database]\nname = "report test database"\n']
    for sid in ids:
        recs = list(SPECIES[sid])
        if seed is not None:
            random.Random(f"{seed}-{sid}").shuffle(recs)
        text = "THERMO\n" + "\n".join(nasa7_record(*r) for r in recs) + "\nEND\n"
        (folder / f"{sid}.nasa7").write_text(text)
        manifest.append(f'[[source]]\nid = "{sid}"\npath = "{sid}.nasa7"\nformat = "nasa7"\n'
                        f'citation = "synthetic test records"\npriority = {10 if sid == "alpha" else 0}\n')
    (folder / "sources.toml").write_text("\n".join(manifest))
    return folder


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    """``thermoledger ARGS`` in a subprocess (stdin/stdout are pipes: no TTY)."""
    return subprocess.run([sys.executable, "-c", "from pipeline.cli.app import main; main()", *args],
                          capture_output=True, text=True, cwd=cwd, timeout=600)


def findings_json(out: Path) -> list[dict]:
    return json.loads((out / "report" / "findings.json").read_text())["findings"]
