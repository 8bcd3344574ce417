"""Staging-table schemas: units in the column names, physical ranges as checks.

All values are SI after ingest: temperatures in K, energies in J/mol, entropies and heat
capacities in J/(mol·K). Ranges are deliberately wide physical sanity limits (they catch
unit slips and garbage, not subtle errors; the checks do that):

* temperatures 0 < T ≤ 1e5 K (T = 0 only as the first row of a table);
* |H|, |ΔfH|, |ΔfG| ≤ 1e8 J/mol (100 MJ/mol is far beyond any chemical species);
* 0 ≤ S ≤ 1e5 J/(mol·K); |Cp| ≤ 1e5 J/(mol·K); uncertainties ≥ 0.
"""
from __future__ import annotations

import pandera.pandas as pa
from pandera.pandas import Check, Column, DataFrameSchema

STATES = ["g", "l", "cr", "aq"]
T_MAX_K = 1.0e5
E_MAX_J_MOL = 1.0e8
S_MAX_J_MOL_K = 1.0e5

_finite = Check(lambda s: s.abs() < float("inf"), element_wise=False, error="finite number")


def _t(nullable=False, allow_zero=False):
    low = Check.ge(0.0) if allow_zero else Check.gt(0.0)
    return Column(float, [low, Check.le(T_MAX_K)], nullable=nullable, coerce=True)


def _energy(nullable=True):
    return Column(float, [Check.in_range(-E_MAX_J_MOL, E_MAX_J_MOL)], nullable=nullable, coerce=True)


def _entropy(nullable=True, non_negative=False):
    lo = 0.0 if non_negative else -S_MAX_J_MOL_K
    return Column(float, [Check.in_range(lo, S_MAX_J_MOL_K)], nullable=nullable, coerce=True)


def _uncertainty():
    return Column(float, [Check.ge(0.0), _finite], nullable=True, coerce=True)


SPECIES_META = DataFrameSchema(
    {
        "species": Column(str, Check.str_matches(r"^.+\((g|l|cr|aq)(,[^()]+)?\)$")),
        "stated_molar_mass_g_mol": Column(float, Check.in_range(0.0, 1.0e4, include_min=False),
                                          nullable=True, coerce=True),
        "reference_element": Column(bool, coerce=True),
        "geometry": Column(object, Check.isin(["atom", "linear", "nonlinear"]), nullable=True),
    },
    name="species_meta", strict=False,
)

RECORDS = DataFrameSchema(
    {
        "record_id": Column(str, unique=True),
        "species": Column(str),
        "kind": Column(str, Check.isin(["polynomial", "table"])),
        "state": Column(str, Check.isin(STATES)),
        "t_low_k": _t(allow_zero=True),
        "t_high_k": _t(),
        "stated_dfh_j_mol": _energy(),
        "stated_molar_mass_g_mol": Column(float, Check.gt(0.0), nullable=True, coerce=True),
    },
    checks=[Check(lambda df: df["t_low_k"] < df["t_high_k"], error="T range ascending (t_low_k < t_high_k)")],
    name="records", strict=False,
)

_coef = {c: Column(float, _finite, coerce=True) for c in ("a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2")}
SEGMENTS = DataFrameSchema(
    {"record_id": Column(str), "t_low_k": _t(), "t_high_k": _t(), **_coef},
    checks=[Check(lambda df: df["t_low_k"] < df["t_high_k"], error="T range ascending (t_low_k < t_high_k)")],
    name="segments", strict=False,
)

TABLE_POINTS = DataFrameSchema(
    {
        "record_id": Column(str),
        "t_k": _t(allow_zero=True),
        "cp_j_mol_k": Column(float, Check.in_range(-S_MAX_J_MOL_K, S_MAX_J_MOL_K), coerce=True),
        "s_j_mol_k": _entropy(non_negative=True),
        "gef_j_mol_k": _entropy(),
        "h_minus_href_j_mol": _energy(),
        "dfh_j_mol": _energy(),
        "dfg_j_mol": _energy(),
        "log_kf": Column(float, Check.in_range(-1.0e6, 1.0e6), nullable=True, coerce=True),
        **{f"uncertainty_{c}": _uncertainty() for c in
           ("cp_j_mol_k", "s_j_mol_k", "gef_j_mol_k", "h_minus_href_j_mol", "dfh_j_mol", "dfg_j_mol", "log_kf")},
    },
    name="table_points", strict=False,
)

REACTIONS = DataFrameSchema(
    {
        "reaction_id": Column(str, unique=True),
        "quantity": Column(str, Check.isin(["drh", "drg", "log_k"])),
        "t_k": _t(),
        "value": Column(float, _finite, coerce=True),
        "uncertainty": Column(float, [Check.ge(0.0), _finite], coerce=True),
    },
    name="reactions", strict=False,
)

SPECIES = DataFrameSchema(
    {
        "species": Column(str, unique=True),
        "state": Column(str, Check.isin(STATES)),
        "molar_mass_g_mol": Column(float, Check.ge(0.0), coerce=True),
    },
    name="species", strict=False,
)

__all__ = ["pa", "SPECIES_META", "RECORDS", "SEGMENTS", "TABLE_POINTS", "REACTIONS", "SPECIES"]
