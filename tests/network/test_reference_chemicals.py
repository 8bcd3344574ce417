"""Reconciled ΔfH°(298.15) of alkanes from combustion enthalpies against the `chemicals`
library (Bell et al., *chemicals*, 2016–), method ``ATCT_G`` — Active Thermochemical
Tables gas-phase values (Ruscic et al.), as shipped in chemicals 1.5.

Combustion enthalpies fed in, at 298.15 K, to CO2(g) and H2O(l) (all from memory):
  C(graphite): −393.51 ± 0.13 kJ/mol and H2(g): −285.830 ± 0.040 kJ/mol — Cox, Wagman &
  Medvedev, *CODATA Key Values for Thermodynamics* (1989);
  CH4: −890.7 ± 0.4, C2H6: −1560.7 ± 0.3, C3H8: −2219.2 ± 0.5, n-C4H10: −2877.6 ± 0.6 kJ/mol —
  Pittam & Pilcher, J. Chem. Soc. Faraday Trans. 1 68 (1972) 2224, as listed in the NIST
  Chemistry WebBook (Linstrom & Mallard, eds., NIST SRD 69).
Tolerance: 2 reconciled standard uncertainties (the ATcT values' own uncertainties, 0.1–0.3
kJ/mol, are smaller than those); the reconciled uncertainty itself is checked against its
hand propagation u² = u_c² + a² u_CO2² + b² u_H2O² (GUM, JCGM 100:2008).
"""
from __future__ import annotations

import math

import pytest

from pipeline.checks.reactions import network_worst_offender
from pipeline.constants import T_REF
from tests.network.helpers import network_context, reactions

C, H2, O2, CO2, H2O = "C(cr,graphite)", "H2(g)", "O2(g)", "CO2(g)", "H2O(l)"
# key: (CAS, carbon atoms, hydrogen atoms, ΔcH° [J/mol], u [J/mol])
ALKANES = {
    "CH4(g)": ("74-82-8", 1, 4, -890.7e3, 0.4e3),
    "C2H6(g)": ("74-84-0", 2, 6, -1560.7e3, 0.3e3),
    "C3H8(g)": ("74-98-6", 3, 8, -2219.2e3, 0.5e3),
    "C4H10(g,n-butane)": ("106-97-8", 4, 10, -2877.6e3, 0.6e3),
}
U_CO2, U_H2O = 0.13e3, 0.040e3


def _rx():
    rows = [("cC", {C: -1, O2: -1, CO2: 1}, "drh", T_REF, -393.51e3, U_CO2),
            ("cH", {H2: -1, O2: -0.5, H2O: 1}, "drh", T_REF, -285.83e3, U_H2O)]
    for key, (_, nc, nh, dch, u) in ALKANES.items():
        rows.append((f"c-{key}", {key: -1, O2: -(nc + nh / 4), CO2: nc, H2O: nh / 2}, "drh", T_REF, dch, u))
    return reactions(rows)


@pytest.mark.parametrize("key", sorted(ALKANES))
def test_reconciled_formation_enthalpy_matches_atct(key):
    from chemicals.reaction import Hfg

    ctx = network_context(rx=_rx())
    network_worst_offender(ctx)
    rec = ctx.tables_out["reconciled"].set_index("species")
    cas, nc, nh, _, u = ALKANES[key]
    x = rec.loc[key, "dfh_298_j_mol"]
    ux = rec.loc[key, "uncertainty_dfh_298_j_mol"]
    assert ux == pytest.approx(math.sqrt(u ** 2 + (nc * U_CO2) ** 2 + (nh / 2 * U_H2O) ** 2), rel=1e-6)
    ref = Hfg(cas, method="ATCT_G")
    assert abs(x - ref) <= 2 * ux, f"{key}: reconciled {x:.0f} vs ATcT {ref:.0f} J/mol (u = {ux:.0f})"
