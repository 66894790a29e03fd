"""Running a treatment train: each step in order, on the water the step before leaves.

The step functions live in :mod:`.train` (oxidise, dose, separate) and
:mod:`.blend`; this module is the one place that calls them in order, so
neither needs the other.
"""

from __future__ import annotations

from ..errors import InputError, UnreachableError
from .basis import Batch, Flow
from .blend import blend_step
from .effluent import Water
from .train import StepResult, StepSpec, dose_step, oxidise_step, separate_step

__all__ = ["run_train"]


def run_train(steps: tuple[StepSpec, ...], water: Water, basis: Batch | Flow, *,
              sludge: tuple[float, float]) -> tuple[StepResult, ...]:
    """Run every step in order, each on the water the one before leaves.

    A blend step, if any, comes first and makes the water (``water`` is then
    ignored; :func:`.blend.blend_streams` builds it).

    Raises
    ------
    InputError
        Naming the step (``step[2].reagent``) when a step cannot be planned.
    """
    out: list[StepResult] = []
    for i, spec in enumerate(steps, start=1):
        try:
            if spec.kind == "blend":
                result = blend_step(spec, basis, steps[i:])
            elif spec.kind == "oxidise":
                result = oxidise_step(spec, water, basis)
            elif spec.kind == "dose":
                result = dose_step(spec, water, basis)
            else:
                result = separate_step(spec, water, basis, sludge)
        except InputError as err:
            raise InputError(f"step[{i}].{err.field}", err.reason) from None
        except UnreachableError as err:
            raise InputError(f"step[{i}].ph_aim", str(err)) from None
        out.append(result)
        water = result.water_out
    return tuple(out)
