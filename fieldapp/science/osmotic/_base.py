"""Physical constants and the array helpers shared by the solute-potential models."""
from __future__ import annotations

import numpy as np

from .. import InputError

# ---------------------------------------------------------------------------
# Physical constants
# ---------------------------------------------------------------------------
#: Molar gas constant, J/(mol K) -- CODATA 2018 (exact: N_A * k_B).
R_J_MOL_K = 8.314462618
#: Elementary charge, C -- SI 2019 exact value (CODATA 2018).
ELEMENTARY_CHARGE_C = 1.602176634e-19
#: Boltzmann constant, J/K -- SI 2019 exact value (CODATA 2018).
BOLTZMANN_J_K = 1.380649e-23
#: Avogadro constant, 1/mol -- SI 2019 exact value (CODATA 2018).
AVOGADRO_PER_MOL = 6.02214076e23
#: Vacuum permittivity, F/m -- CODATA 2018 recommended value.
VACUUM_PERMITTIVITY_F_M = 8.8541878128e-12
#: One standard atmosphere in MPa (definition: 101 325 Pa).
ATM_MPa = 0.101325
#: Zero of the Celsius scale, K (definition).
KELVIN_OFFSET = 273.15
#: Molar mass of NaCl, kg/mol -- IUPAC standard atomic weights
#: Na 22.98976928 + Cl 35.453 (conventional value).
NACL_MOLAR_MASS_KG_MOL = 0.05844277


def _arr(value, name: str) -> np.ndarray:
    """Convert to a float64 array, or raise InputError naming the field."""
    try:
        out = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{name} must be a number (for example 2.5), got {value!r}.",
            field=name,
        ) from None
    return out


def _in(x: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """True where lo <= x <= hi (NaN is never in range)."""
    return (x >= lo) & (x <= hi)
