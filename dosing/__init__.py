"""Wastewater neutralisation dosing planner: the engine.

The public API, in the order a plan is made:

* :class:`Measurements` and :func:`infer_water` - measured pH, temperature,
  alkalinity or acidity and known solutes to a :class:`Water`.
* :func:`get_reagent` / :func:`custom_reagent` - the product dosed.
* :class:`Target`, :class:`Batch`, :class:`Flow` - the window and the amount
  of water.
* :func:`plan_dose` - the :class:`Plan`: dose, window band, sensitivity, pH
  after, titration curve, warnings and cautions.
* :func:`titration_curve` - pH and buffer intensity against dose.
* :func:`speciate`, :func:`solve_ph`, :func:`dose_to_ph` - the vectorised
  core on :class:`Mixture` arrays, for many waters at once.

The engine is pure: no printing, no files. Every error is a
:class:`DosingError`.
"""

from .planning.basis import Batch, Flow, Target
from .planning.curve import titration_curve
from .planning.effluent import Water, infer_water
from .planning.measurements import Measurements
from .chem import Mixture, dose_to_ph, solve_ph, speciate
from .errors import (DosingError, InputError, ModelError, ScenarioError,
                     UnreachableError)
from .planning.plan import Plan, plan_dose
from .planning.reagents import CATALOGUE, Reagent, get_reagent
from .planning.strengths import custom_reagent

from .version import __version__

__all__ = [
    "Measurements", "Water", "infer_water", "Mixture", "dose_to_ph", "solve_ph", "speciate",
    "DosingError", "InputError", "ModelError", "ScenarioError", "UnreachableError",
    "Batch", "Flow", "Plan", "Target", "plan_dose", "titration_curve",
    "CATALOGUE", "Reagent", "custom_reagent", "get_reagent", "__version__",
]
