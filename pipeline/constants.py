"""Physical constants and conventions used everywhere in thermoledger.

Every constant names its source. Nothing else in the package writes these numbers.
"""
from __future__ import annotations

import math

# R, N_A, K_B, H_PLANCK, M_U (and R_LN_ATM, which needs R) come from scipy.constants on
# first use (module ``__getattr__`` at the end): importing scipy.constants takes about
# 0.5 s, which commands that need none of them (an unchanged re-run) should not pay.

#: Molar gas constant R [J/(mol*K)]. CODATA 2018: exact, since the 2019 SI redefinition
#: (R = N_A k_B with both fixed). Taken from scipy.constants, which carries CODATA 2018.
R: float

#: Avogadro constant [1/mol], CODATA 2018 (exact).
N_A: float

#: Boltzmann constant [J/K], CODATA 2018 (exact).
K_B: float

#: Planck constant [J*s], CODATA 2018 (exact).
H_PLANCK: float

#: Atomic mass constant [kg], CODATA 2018.
M_U: float

_FROM_SCIPY = {"R": "R", "N_A": "N_A", "K_B": "k", "H_PLANCK": "h", "M_U": "atomic_mass"}

#: Reference temperature T° [K] of thermochemical tables (IUPAC convention).
T_REF: float = 298.15

#: Standard pressure p° [bar] (IUPAC recommendation since 1982).
P_STD_BAR: float = 1.0

#: One standard atmosphere [bar]: 101325 Pa exactly (definition, CGPM 1954).
ATM_BAR: float = 1.01325

#: 1 bar in Pa (definition).
BAR_PA: float = 1.0e5

#: Thermochemical calorie [J], exact by definition (NBS 1956). ``cal`` everywhere in
#: thermoledger means this one; the international-table calorie is 4.1868 J.
CAL_TH_J: float = 4.184

#: R ln(1.01325) [J/(mol*K)]: entropy shift of an ideal gas between 1 atm and 1 bar.
R_LN_ATM: float

#: ln 10, for log10 K <-> Gibbs energy conversions.
LN10: float = math.log(10.0)

#: Elements whose reference state at 298.15 K and 1 bar is a gas, with the atoms per
#: molecule of that reference gas (H2, N2, O2, F2, Cl2; the noble gases are monatomic).
#: Standard reference states as in Cox, Wagman & Medvedev, *CODATA Key Values for
#: Thermodynamics* (1989). Used when the database declares no reference species itself.
GASEOUS_REFERENCE_ATOMICITY: dict[str, int] = {
    "H": 2, "N": 2, "O": 2, "F": 2, "Cl": 2,
    "He": 1, "Ne": 1, "Ar": 1, "Kr": 1, "Xe": 1, "Rn": 1,
}


def __getattr__(name: str) -> float:
    """The scipy-derived constants, computed once on first access (PEP 562)."""
    if name in _FROM_SCIPY or name == "R_LN_ATM":
        from scipy import constants as sc

        g = globals()
        for ours, theirs in _FROM_SCIPY.items():
            g[ours] = float(getattr(sc, theirs))
        g["R_LN_ATM"] = g["R"] * math.log(ATM_BAR)
        return g[name]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
