"""Species keys for records (inputs.md, "Species identity") and the species-csv reader."""
from __future__ import annotations

import json

import pandas as pd
import pytest

from pipeline.ingest import base as ib
from pipeline.ingest import species_csv
from pipeline.ingest.resolve import build_key, key_reason, resolve_records, species_table

from .conftest import assert_accounted, source


@pytest.mark.parametrize("name,state,label,elements,charge,key", [
    ("HE", "g", None, {"He": 1}, 0, "He(g)"),
    ("CL2", "g", None, {"Cl": 2}, 0, "Cl2(g)"),
    ("CO", "g", None, {"C": 1, "O": 1}, 0, "CO(g)"),
    ("H2O(L)", "l", None, {"H": 2, "O": 1}, 0, "H2O(l)"),
    ("AL2O3(a)", "cr", "a", {"Al": 2, "O": 3}, 0, "Al2O3(cr,a)"),
    ("C3H6,propylene", "g", None, {"C": 3, "H": 6}, 0, "C3H6(g,propylene)"),
    ("OH-", "g", None, {"O": 1, "H": 1}, -1, "OH-(g)"),
    ("e-", "g", None, {}, -1, "e-(g)"),
])
def test_build_key(name, state, label, elements, charge, key):
    assert build_key(name, state, label, elements, charge)[0] == key


def test_unmatched_casing_is_kept_and_flagged():
    assert build_key("AIR", "g", None, {"N": 1.56, "O": 0.42}, 0) == ("AIR(g)", False)


def _meta(rows):
    return ib.frame([dict(species=k, aliases=a, stated_molar_mass_g_mol=float("nan"), reference_element=False,
                          geometry=None, cas=None, source_id="sp", file="sp.csv", line=i + 2)
                     for i, (k, a) in enumerate(rows)], ib.SPECIES_META_COLUMNS)


def _rec(name, state, elements, label=None, hint=None):
    return dict(record_id=f"s/{name}", source_id="s", name=name, species_hint=hint, state=state, label=label,
                elements_json=json.dumps(elements), charge=0, kind="polynomial", form="nasa7", file="f", line=1)


def test_alias_wins_case_insensitively():
    meta = _meta([("C(cr,graphite)", "C(gr);GRAPHITE"), ("H2O(l)", "WATER-LIQ")])
    recs = ib.frame([_rec("c(GR)", "cr", {"C": 1}, label="GR"), _rec("water-liq", "l", {"H": 2, "O": 1}),
                     _rec("N2", "g", {"N": 2})], ib.RECORD_COLUMNS)
    out, warn, bad, _ = resolve_records(recs, meta)
    assert list(out["species"]) == ["C(cr,graphite)", "H2O(l)", "N2(g)"]
    assert not bad.any() and warn is None


def test_alias_contradicting_the_record_is_rejected():
    meta = _meta([("CO2(g)", "CARBON")])
    recs = ib.frame([_rec("CARBON", "g", {"C": 1})], ib.RECORD_COLUMNS)
    _, _, bad, reasons = resolve_records(recs, meta)
    assert bad.tolist() == [True]
    assert "contradict species 'CO2(g)'" in reasons[0]



def test_every_reason_is_key_reason_of_its_record():
    """Declared keys (hints), aliases and built keys, checked at once and each distinct (key,
    counts) once, give every record :func:`key_reason` of its own key and counts; the
    warnings keep the records' order."""
    meta = _meta([("CO2(g)", "CARBON;dioxide")])
    recs = ib.frame([
        _rec("H2O", "g", {"H": 2, "O": 1}, hint="H2O(g)"),          # a declared key that fits
        _rec("H2O#2", "g", {"H": 1}, hint="H2O(g)"),                # ... that contradicts
        _rec("H2O#3", "g", {"H": 2, "O": 1}, hint="H2O(g)"),        # the first pair again
        _rec("bad", "g", {"H": 1}, hint="H2O(q)"),                  # no such state
        _rec("xx", "g", {"H": 1}, hint="Xx(g)"),                    # no such element
        _rec("AIR", "g", {"N": 1.56, "O": 0.42}),                   # not re-cased: warned, no formula
        _rec("CARBON", "g", {"C": 1}),                              # an alias that contradicts
        _rec("Dioxide", "g", {"C": 1, "O": 2}, hint="CO(g)"),       # the alias beats the hint
        _rec("ch4", "g", {"C": 1, "H": 4}),                         # built and re-cased
        _rec("ZZ", "g", {"N": 1, "O": 1}),                          # not re-cased: warned, no formula
    ], ib.RECORD_COLUMNS)
    out, warn, bad, reasons = resolve_records(recs, meta)
    assert list(out["species"]) == ["H2O(g)", "H2O(g)", "H2O(g)", "H2O(q)", "Xx(g)", "AIR(g)", "CO2(g)",
                                    "CO2(g)", "CH4(g)", "ZZ(g)"]
    assert reasons == [key_reason(k, json.loads(e)) for k, e in zip(out["species"], recs["elements_json"])]
    assert bad.tolist() == [r is not None for r in reasons] == [False, True, False, True, True, True, True,
                                                                 False, False, True]
    assert list(warn["subject"]) == ["AIR(g)", "ZZ(g)"]

def test_species_table_from_keys():
    sp = species_table(["OH-(aq)", "Ca(OH)2(cr)", "C(cr,diamond)"], _meta([])).set_index("species")
    assert sp.loc["OH-(aq)", "charge"] == -1 and sp.loc["OH-(aq)", "state"] == "aq"
    assert sp.loc["Ca(OH)2(cr)", "n_atoms"] == 5
    assert sp.loc["C(cr,diamond)", "label"] == "diamond"


def test_species_csv_reader(tmp_path):
    p = tmp_path / "species.csv"
    p.write_text('species,aliases,molar_mass_g_mol,reference_element,geometry,cas\n'
                 'N2(g),NITROGEN,28.014,true,linear,7727-37-9\n'
                 '"C(cr,graphite)",C(gr),12.011,true,,\n'
                 'N2(g),,28.014,true,linear,\n'
                 'Qq(g),,1,false,,\n'
                 'H2O(g),,18.015,maybe,,\n')
    r = species_csv.read(p, source("species-csv"), "species.csv")
    assert list(r.species_meta["species"]) == ["N2(g)", "C(cr,graphite)"]
    reasons = list(r.rejected["reason"])
    assert "declared again (first on line 2)" in reasons[0]
    assert "unknown element symbol 'Qq'" in reasons[1]
    assert "reference_element 'maybe' is not true/false" in reasons[2]
    assert_accounted(r, "species-csv")
