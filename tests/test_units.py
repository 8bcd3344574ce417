"""Units: the one pint registry against published definitions, and the no-guess rule."""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants

from pipeline import constants
from pipeline.errors import InputError, UnitError
from pipeline.units import (UREG, column_factor, factor_to_si, is_dimensionless, is_kelvin,
                            parse_unit, split_header, to_si)


def test_calorie_is_thermochemical():
    """NIST SP 811 (2008), Taylor & Thompson, "Guide for the Use of the SI", B.8:
    thermochemical calorie cal_th = 4.184 J exactly; IT calorie cal_IT = 4.1868 J."""
    assert factor_to_si("cal/mol", "energy") == 4.184
    assert factor_to_si("kcal/mol", "energy") == 4184.0
    assert factor_to_si("cal/(mol*K)", "entropy") == 4.184
    assert UREG.Quantity(1, "cal_it").m_as("J") == pytest.approx(4.1868, rel=0, abs=1e-12)
    assert factor_to_si("cal/mol", "energy") != UREG.Quantity(1, "cal_it").m_as("J")
    assert constants.CAL_TH_J == 4.184


def test_atmosphere_and_gas_constant():
    """1 atm = 101325 Pa exactly (CGPM 1954; NIST SP 811, 2008). R = N_A k exactly since the
    2019 SI, with N_A = 6.02214076e23 /mol and k = 1.380649e-23 J/K (CODATA 2018; BIPM SI
    Brochure, 9th ed., 2019), i.e. 8.314462618... J/(mol*K); scipy.constants carries it."""
    assert UREG.Quantity(1, "atm").m_as("Pa") == 101325.0
    assert constants.ATM_BAR * constants.BAR_PA == pytest.approx(101325.0, rel=1e-15)
    assert constants.R == scipy.constants.R
    assert constants.R == pytest.approx(6.02214076e23 * 1.380649e-23, rel=1e-15)
    assert constants.R == pytest.approx(8.314462618, abs=1e-9)
    # R ln(1.01325) = 0.1094 J/(mol*K): the 1 atm → 1 bar entropy shift of an ideal gas
    # (inputs.md; Freeman, Bull. Chem. Thermodyn. 25 (1982) 523, from memory)
    assert scipy.constants.R * math.log(101325 / 1e5) == pytest.approx(0.1094, abs=5e-5)
    assert constants.R_LN_ATM == pytest.approx(0.1094, abs=5e-5)


@pytest.mark.parametrize("text", ["J/(mol*K)", "J mol-1 K-1", "J·mol⁻¹·K⁻¹", "J/mol/K", "J mol^-1 K^-1"])
def test_spellings_of_one_unit(text):
    assert factor_to_si(text, "entropy") == 1.0


def test_kilo_prefix_and_columns():
    v = to_si(np.array([1.0, -2.5]), "kJ/mol", "energy")
    np.testing.assert_array_equal(v, [1000.0, -2500.0])


def test_wrong_dimension_and_unknown_unit():
    with pytest.raises(UnitError) as e:
        factor_to_si("kJ/mol", "entropy")
    assert str(e.value) == "found unit 'kJ/mol', expected a unit of J/(mol*K) (e.g. J/(mol*K), cal/(mol*K))"
    with pytest.raises(UnitError):
        factor_to_si("kJ", "energy")            # per mol is part of the unit
    with pytest.raises(UnitError):
        parse_unit("bogons/mol")


def test_kelvin_and_dimensionless():
    assert is_kelvin("K") and is_kelvin("kelvin")
    assert not is_kelvin("degC") and not is_kelvin("degF") and not is_kelvin("nonsense")
    assert is_dimensionless(None) and is_dimensionless("") and is_dimensionless("1")
    assert not is_dimensionless("kJ/mol")


@pytest.mark.parametrize("header,expected", [
    ("cp [cal/(mol*K)]", ("cp", "cal/(mol*K)")),
    ("t", ("t", None)),
    ("  dfh[kJ/mol] ", ("dfh", "kJ/mol")),
    ("t [K]", ("t", "K")),
])
def test_split_header(header, expected):
    assert split_header(header) == expected


def test_column_without_any_unit_is_an_error():
    with pytest.raises(InputError) as e:
        column_factor("tables/x.csv", "dfh", None, None, "energy", "old-tables")
    assert str(e.value) == (
        "found column 'dfh' without a unit in tables/x.csv:1, expected the unit in square "
        "brackets in the header or energy_unit in the manifest (units are never guessed) — "
        "fix: write e.g. 'dfh [kJ/mol]' or add energy_unit = \"kJ\" to source 'old-tables' in "
        "sources.toml")
    assert e.value.line == 1


def test_bracket_wins_over_manifest():
    assert column_factor("x.csv", "cp [J/(mol*K)]", "J/(mol*K)", "kcal", "entropy", "s") == 1.0
    assert column_factor("x.csv", "cp", None, "kcal", "entropy", "s") == 4184.0
    assert column_factor("x.csv", "dfh", None, "cal", "energy", "s") == 4.184


def test_temperature_must_be_kelvin_and_logk_has_no_unit():
    assert column_factor("x.csv", "t [K]", "K", "kJ", "temperature", "s") == 1.0
    with pytest.raises(InputError, match="temperature column 't \\[degC\\]'"):
        column_factor("x.csv", "t [degC]", "degC", None, "temperature", "s")
    with pytest.raises(InputError, match="dimensionless column"):
        column_factor("x.csv", "log_kf [kJ/mol]", "kJ/mol", None, "dimensionless", "s")
    with pytest.raises(InputError, match="unit 'kJ/mol' in column 'cp \\[kJ/mol\\]'"):
        column_factor("x.csv", "cp [kJ/mol]", "kJ/mol", None, "entropy", "s")
