"""composition.molar-mass: stated molar masses against IUPAC atomic weights."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.checks.composition import composition_molar_mass
from tests.builders import context, poly_record
from tests.checks.gas_reference import config_from, gas_context, run_checks

FORMULAS = ["H2O", "CO2", "CH4", "C10H22", "Ca(OH)2", "H2SO4", "UF6", "Pb(NO3)2", "NaCl", "Fe2O3"]


def const_record(species, source="src", stated=np.nan):
    c = np.zeros(9)
    c[2] = 3.5
    rec, segs = poly_record(species, source, [(300.0, 1000.0, c)])
    rec["stated_molar_mass_g_mol"] = stated
    return rec, segs


def meta(masses: dict) -> pd.DataFrame:
    return pd.DataFrame({"species": list(masses), "stated_molar_mass_g_mol": list(masses.values()),
                         "reference_element": False, "geometry": None, "source_id": "species"})


def chemicals_mass(formula: str) -> float:
    """Molar mass from the `chemicals` library (chemicals.elements.molecular_weight with
    nested_formula_parser; its atomic weights are the IUPAC standard values, e.g. C 12.0107)."""
    from chemicals.elements import molecular_weight, nested_formula_parser

    return molecular_weight(nested_formula_parser(formula))


def test_species_masses_agree_with_chemicals_within_the_check_tolerance():
    # periodictable (abridged IUPAC values, C 12.011) and chemicals (C 12.0107) differ only
    # inside the interval elements' ranges: within 0.01 + 0.01 per interval atom
    ctx = context([const_record(f"{f}(g)") for f in FORMULAS])
    sp = ctx.species.set_index("formula")
    for f in FORMULAS:
        assert sp.loc[f, "molar_mass_g_mol"] == pytest.approx(chemicals_mass(f), abs=0.01 + 0.01 * 22)


def test_masses_stated_from_chemicals_pass():
    masses = {f"{f}(g)": chemicals_mass(f) for f in FORMULAS}
    ctx = context([const_record(k, stated=v) for k, v in masses.items()], species_meta=meta(masses))
    assert len(composition_molar_mass(ctx)) == 0


def test_coolprop_molar_masses_pass():
    # CoolProp's fluid molar masses (Bell et al. 2014) stated in species-csv and on every fit
    assert len(run_checks(gas_context(), ("composition.molar-mass",))) == 0


def test_one_atom_missing_is_an_error_with_its_hint():
    # planted defect: CO2 stated with CO's mass (28.010 g/mol)
    ctx = context([const_record("CO2(g)", source="nasa", stated=28.0101)])
    f = composition_molar_mass(ctx)
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["composition.molar-mass", "error", "CO2(g)", "nasa"]]
    assert f["expected"].iloc[0] == pytest.approx(44.0095, abs=0.002)
    assert f["tolerance"].iloc[0] == pytest.approx(0.04)        # 0.01 + 3 interval atoms
    assert "one O atom" in f["hint"].iloc[0]
    assert f["unit"].iloc[0] == "g/mol"


def test_species_list_mass_is_checked():
    ctx = context([const_record("NaCl(g)")], species_meta=meta({"NaCl(g)": 58.50}))
    f = composition_molar_mass(ctx)
    # NaCl 58.44 g/mol (Na 22.990 + Cl 35.45, CIAAW 2021 abridged values — from memory);
    # tolerance 0.01 + 0.01 for the one Cl atom
    assert f["severity"].tolist() == ["error"]
    assert f["expected"].iloc[0] == pytest.approx(58.44, abs=0.005)
    assert f["tolerance"].iloc[0] == pytest.approx(0.02)
    assert "species list" in f["message"].iloc[0]


def test_ions_carry_the_electron_mass():
    # OH−: 17.007 + 0.00055 g/mol (NASA/TP-2002-211556 lists 17.00789 — from memory)
    ctx = context([const_record("OH-(g)", stated=17.00789)])
    assert len(composition_molar_mass(ctx)) == 0


def test_tolerance_overrides_are_honoured(tmp_path):
    rec = const_record("NaCl(g)", stated=58.465)      # 0.025 above 58.440, tolerance 0.02
    assert len(composition_molar_mass(context([rec]))) == 1
    cfg = config_from(tmp_path, '[checks."composition.molar-mass"]\nbase_g_mol = 0.02\n')
    assert len(composition_molar_mass(context([rec], config=cfg))) == 0
    cfg = config_from(tmp_path, '[checks."composition.molar-mass"]\nper_interval_atom_g_mol = 0.02\n')
    assert len(composition_molar_mass(context([rec], config=cfg))) == 0
