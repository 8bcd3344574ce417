"""Reference data from libraries outside the project, for tests.

CoolProp's ideal-gas functions of its reference equations of state (Bell, Wronski, Quoilin
& Lemort, "Pure and pseudo-pure fluid thermophysical property evaluation and the
open-source thermophysical property library CoolProp", Ind. Eng. Chem. Res. 53 (2014)
2498). Only differences of H and S are used (each fluid has its own reference state);
``AS.Tmax()`` is respected (CoolProp returns values beyond it without error).
"""
from __future__ import annotations

import numpy as np

from pipeline.constants import P_STD_BAR, T_REF


def coolprop_ideal_gas(fluid: str, t_k, p_bar: float = P_STD_BAR):
    """Ideal-gas Cp [J/(mol*K)], H − H(298.15) [J/mol], S(T, p) − S(298.15, p) [J/(mol*K)].

    Raises ValueError if a temperature exceeds the equation of state's Tmax.
    """
    import CoolProp.CoolProp as CP  # slow import (~2 s): only in tests that need it

    st = CP.AbstractState("HEOS", fluid)
    t = np.asarray(t_k, float)
    if t.max() > st.Tmax() + 1e-9:
        raise ValueError(f"{fluid}: T up to {t.max()} K beyond CoolProp Tmax {st.Tmax()} K")
    R = st.gas_constant()
    p = p_bar * 1e5

    def at(T):
        st.update(CP.DmolarT_INPUTS, p / (R * T), T)
        return st.cp0molar(), st.hmolar_idealgas(), st.smolar_idealgas()

    ref = at(T_REF)
    vals = np.array([at(T) for T in t])
    return vals[:, 0], vals[:, 1] - ref[1], vals[:, 2] - ref[2]
