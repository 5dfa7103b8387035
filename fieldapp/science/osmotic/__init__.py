"""Solute (osmotic) potential from EC, the soil solution as the soil dries, and
total water potential.

Three routes turn an EC at 25 °C into a solute potential (MPa, negative):

``handbook60``
    The USDA Handbook 60 rule OP (atm) ≈ 0.36 × EC (mmhos/cm), made for
    saturation extracts of mixed-salt soils.
``rule_004``
    −0.04 MPa per dS/m, a rule of thumb for NaCl-dominated water.
``nacl_pitzer`` (the default)
    A thermodynamic NaCl-equivalent: the EC is read as the EC of an NaCl
    solution (an NaCl conductivity equation fitted to published NaCl data at
    25 °C, inverted; McCleskey et al. 2012 for its temperature dependence),
    and the osmotic coefficient of that solution comes from the Pitzer
    equations.

All three are estimates. A real soil solution is a mixture (Ca, Mg, SO4,
HCO3 ...) whose osmotic effect per unit EC differs from NaCl by several
percent; for seawater (SP 35, 25 °C) the NaCl-equivalent route reads about
2.8 % more negative than the IAPWS-08 seawater value, which is the
composition effect (Mg and SO4 conduct more per unit osmotic effect than
Na and Cl). See :data:`CAUTION`.

Conventions: every function accepts scalars or arrays (numpy broadcasting)
and returns ``np.ndarray`` of float64 (0-d for scalar input). Outside a
model's stated range the result is NaN, never an extrapolation; the caller
decides what to show (e.g. fall back from ``nacl_pitzer`` to ``handbook60``
and flag it). Input that is not a number at all raises
:class:`fieldapp.science.InputError`.

Modules, one concern each (this package re-exports every public name, so
``from fieldapp.science.osmotic import X`` keeps working):

``water``           pure water: density (Kell 1975), permittivity (Malmberg &
                    Maryott 1956), the Debye-Hückel slope A_phi
``conductivity``    the McCleskey et al. (2012) ion model and the NaCl fit at
                    25 °C: molality -> EC
``nacl_inversion``  EC -> NaCl molality (bisection, and a fast path at 25 °C)
``pitzer``          osmotic coefficient of NaCl (Pitzer & Mayorga 1973)
``nacl_density``    NaCl(aq) density (Rogers & Pitzer 1982), molarity <-> molality
``routes``          solute potential by each route, the routes table, the caution
``seawater``        PSS-78 practical salinity and the sea-salt route
``soil_solution``   the soil solution as the soil dries, total water potential
"""
from __future__ import annotations

from .. import InputError
from ._base import (  # noqa: F401
    ATM_MPa, AVOGADRO_PER_MOL, BOLTZMANN_J_K, ELEMENTARY_CHARGE_C, KELVIN_OFFSET,
    NACL_MOLAR_MASS_KG_MOL, R_J_MOL_K, VACUUM_PERMITTIVITY_F_M,
)
from .water import (  # noqa: F401
    KELL_1975_WATER_DENSITY, MALMBERG_MARYOTT_1956_PERMITTIVITY, debye_huckel_aphi,
    water_density_kg_m3, water_relative_permittivity,
)
from .conductivity import (  # noqa: F401
    MCCLESKEY_2012_IONS, MCCLESKEY_MAX_IONIC_STRENGTH, MCCLESKEY_VALID_TEMP_C,
    NACL_CONDUCTIVITY_25C, NACL_EC25_MAX_dS_m, ec_from_molality_1_1,
    ionic_molal_conductivity, nacl_ec_from_molality, nacl_molal_conductivity_25c,
)
from .nacl_inversion import (  # noqa: F401
    nacl_molality_from_ec25,
)
from .pitzer import (  # noqa: F401
    PITZER_ALPHA, PITZER_B, PITZER_MAYORGA_1973_NACL, PITZER_NACL_MAX_MOLALITY,
    PITZER_NACL_VALID_TEMP_C, SILVESTER_PITZER_1978_NACL_DT, nacl_osmotic_coefficient,
)
from .nacl_density import (  # noqa: F401
    ROGERS_PITZER_1982_NACL_MOLALITY, ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME,
    ROGERS_PITZER_1982_NACL_TEMP_C, nacl_molality_from_molarity,
    nacl_molarity_from_molality, nacl_solution_density_kg_m3,
)
from .routes import (  # noqa: F401
    CAUTION, DEFAULT_ROUTE, HANDBOOK60_OP_atm_PER_dS_m, HANDBOOK60_VALID_dS_m, PSI_S_ROUTES,
    RULE_004_MPa_PER_dS_m, RULE_004_VALID_dS_m, psi_s_all_routes, psi_s_handbook60,
    psi_s_nacl_pitzer, psi_s_rule_004,
)
from .seawater import (  # noqa: F401
    PSS78, REFERENCE_COMPOSITION, SEAWATER_ROUTE, SEAWATER_ROUTE_INFO,
    practical_salinity_pss78, psi_s_seawater, seawater_solute_molality,
)
from .soil_solution import (  # noqa: F401
    FIELD_CAPACITY_MPa, PERMANENT_WILTING_POINT_MPa, SP_PER_FIELD_CAPACITY,
    SP_PER_WILTING_POINT, field_capacity_theta_g, margin_to_wilting_point, soil_solution_ec,
    soil_solution_ec_at_field_capacity, total_water_potential,
)

__all__ = [
    "InputError", "ATM_MPa", "AVOGADRO_PER_MOL", "BOLTZMANN_J_K", "ELEMENTARY_CHARGE_C",
    "KELVIN_OFFSET", "NACL_MOLAR_MASS_KG_MOL", "R_J_MOL_K", "VACUUM_PERMITTIVITY_F_M",
    "KELL_1975_WATER_DENSITY", "MALMBERG_MARYOTT_1956_PERMITTIVITY", "debye_huckel_aphi",
    "water_density_kg_m3", "water_relative_permittivity", "MCCLESKEY_2012_IONS",
    "MCCLESKEY_MAX_IONIC_STRENGTH", "MCCLESKEY_VALID_TEMP_C", "NACL_CONDUCTIVITY_25C",
    "NACL_EC25_MAX_dS_m", "ec_from_molality_1_1", "ionic_molal_conductivity",
    "nacl_ec_from_molality", "nacl_molal_conductivity_25c", "nacl_molality_from_ec25",
    "PITZER_ALPHA", "PITZER_B", "PITZER_MAYORGA_1973_NACL", "PITZER_NACL_MAX_MOLALITY",
    "PITZER_NACL_VALID_TEMP_C", "SILVESTER_PITZER_1978_NACL_DT", "nacl_osmotic_coefficient",
    "ROGERS_PITZER_1982_NACL_MOLALITY", "ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME",
    "ROGERS_PITZER_1982_NACL_TEMP_C", "nacl_molality_from_molarity",
    "nacl_molarity_from_molality", "nacl_solution_density_kg_m3", "CAUTION",
    "DEFAULT_ROUTE", "HANDBOOK60_OP_atm_PER_dS_m", "HANDBOOK60_VALID_dS_m", "PSI_S_ROUTES",
    "RULE_004_MPa_PER_dS_m", "RULE_004_VALID_dS_m", "psi_s_all_routes", "psi_s_handbook60",
    "psi_s_nacl_pitzer", "psi_s_rule_004", "PSS78", "REFERENCE_COMPOSITION",
    "SEAWATER_ROUTE", "SEAWATER_ROUTE_INFO", "practical_salinity_pss78", "psi_s_seawater",
    "seawater_solute_molality", "FIELD_CAPACITY_MPa", "PERMANENT_WILTING_POINT_MPa",
    "SP_PER_FIELD_CAPACITY", "SP_PER_WILTING_POINT", "field_capacity_theta_g",
    "margin_to_wilting_point", "soil_solution_ec", "soil_solution_ec_at_field_capacity",
    "total_water_potential",
]
