"""Pure chemistry: the catalogues, the constants of water, activity and the vectorised solvers.

What lives here: the weak-acid systems (:mod:`.species`) and metals
(:mod:`.metals`) with the source of every constant, the properties of water
and carbonate against temperature (:mod:`.water`), activity models
(:mod:`.activity`), and the vectorised core that works on arrays of many
waters at once: the column layout and constants (:mod:`.columns`), waters as
arrays (:mod:`.mixture`), speciation at a pH (:mod:`.speciation`), the pH
and strong-balance solvers (:mod:`.solvers`), the carbonate behind a lab
alkalinity (:mod:`.alkalinity`) and the dose to a pH (:mod:`.dose`). The
names a caller needs are re-exported here.

What it may import: numpy, the standard library and :mod:`dosing.errors`.
Nothing of the planning layer, the readers or the renderings: this package is
the ground the rest stands on.
"""

from .alkalinity import carbonate_for_alkalinity
from .columns import (CALCIUM, CARBONATE, COLUMN_IDS, METAL_COLUMNS, N_ACIDS, N_SYSTEMS,
                      SITE_COLUMNS, UNKNOWN, Constants, co2_in_air_mol_l, constants_at,
                      system_index)
from .dose import dose_to_ph
from .mixture import Mixture, ReagentVector, add_dose
from .solvers import solve_ph, strong_balance_at_ph
from .speciation import Speciation, charge_residual, speciate

__all__ = [
    "carbonate_for_alkalinity", "CALCIUM", "CARBONATE", "COLUMN_IDS", "METAL_COLUMNS",
    "N_ACIDS", "N_SYSTEMS", "SITE_COLUMNS", "UNKNOWN", "Constants", "co2_in_air_mol_l",
    "constants_at", "system_index", "dose_to_ph", "Mixture", "ReagentVector", "add_dose",
    "solve_ph", "strong_balance_at_ph", "Speciation", "charge_residual", "speciate",
]
