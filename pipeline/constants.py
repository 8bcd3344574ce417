"""Physical constants and conventions used everywhere in thermoledger.

Every constant names its source. Nothing else in the package writes these numbers.
"""
from __future__ import annotations

import math

from scipy import constants as _sc

#: Molar gas constant R [J/(mol*K)]. CODATA 2018: exact, since the 2019 SI redefinition
#: (R = N_A k_B with both fixed). Taken from scipy.constants, which carries CODATA 2018.
R: float = float(_sc.R)

#: Avogadro constant [1/mol], CODATA 2018 (exact).
N_A: float = float(_sc.N_A)

#: Boltzmann constant [J/K], CODATA 2018 (exact).
K_B: float = float(_sc.k)

#: Planck constant [J*s], CODATA 2018 (exact).
H_PLANCK: float = float(_sc.h)

#: Atomic mass constant [kg], CODATA 2018.
M_U: float = float(_sc.atomic_mass)

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
R_LN_ATM: float = R * math.log(ATM_BAR)

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
