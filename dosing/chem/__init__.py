"""Pure chemistry: the catalogues, the constants of water, activity and the vectorised solvers.

What lives here: the weak-acid systems (:mod:`.species`) and metals
(:mod:`.metals`) with the source of every constant, the properties of water
and carbonate against temperature (:mod:`.water`), activity models
(:mod:`.activity`), and the speciation, charge balance and solvers that work
on arrays of many waters at once (:mod:`.equilibrium`).

What it may import: numpy, the standard library and :mod:`dosing.errors`.
Nothing of the planning layer, the readers or the renderings: this package is
the ground the rest stands on.
"""
