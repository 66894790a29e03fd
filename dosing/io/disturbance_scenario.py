"""The [[disturbance]] tables of a scenario: steps and ramps of its influent.

    [[disturbance]]
    at_h = 2.0           # hours from the start of the simulated record
    flow_m3_h = 18       # the flow from then on (optional)
    ph = 3.1             # the influent pH from then on (optional)
    ramp_h = 0.5         # reached over this time (default 0: a step)

``dosing simulate`` runs them instead of made-up disturbances; the plan
itself does not read them. Each table is checked here, one line per
problem, naming the table and the key.
"""

from __future__ import annotations

import math
from typing import Any

from ..errors import ScenarioError
from ..planning.replay import FLOW_MAX_M3_H
from ..planning.simulate_influent import Disturbance

__all__ = ["read_disturbances"]

#: key -> (what it is, lowest, highest)
_KEYS = {"at_h": ("hours from the start", 0.0, 24.0 * 366),
         "flow_m3_h": ("the flow from then on, m3/h", 1e-6, FLOW_MAX_M3_H),
         "ph": ("the influent pH from then on", 0.0, 14.0),
         "ramp_h": ("hours to reach it (0: a step)", 0.0, 24.0 * 366)}


def _number(path: str, where: str, key: str, value: Any) -> float:
    what, low, high = _KEYS[key]
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and \
        math.isfinite(float(value)) and low <= float(value) <= high
    if not ok:
        raise ScenarioError(path, f"{where}.{key}", f"{value!r}; allowed: {what}, "
                            f"{low:g} to {high:g}")
    return float(value)


def read_disturbances(path: str, value: Any) -> tuple[Disturbance, ...]:
    """The checked [[disturbance]] list (empty when the scenario has none)."""
    if value is None:
        return ()
    if not isinstance(value, list) or not all(isinstance(t, dict) for t in value):
        raise ScenarioError(path, "disturbance", "expected [[disturbance]] tables")
    out, last = [], -1.0
    for i, table in enumerate(value, start=1):
        where = f"disturbance[{i}]"
        for key in table:
            if key not in _KEYS:
                raise ScenarioError(path, f"{where}.{key}", "unknown key; allowed: "
                                    + ", ".join(_KEYS))
        if "at_h" not in table:
            raise ScenarioError(path, f"{where}.at_h", "missing; give the hour it starts")
        if "flow_m3_h" not in table and "ph" not in table:
            raise ScenarioError(path, where, "give flow_m3_h, ph or both")
        d = Disturbance(*(_number(path, where, k, table[k]) if k in table else None
                          for k in ("at_h", "flow_m3_h", "ph")),
                        _number(path, where, "ramp_h", table.get("ramp_h", 0.0)))
        if d.at_h < last:
            raise ScenarioError(path, f"{where}.at_h", "the tables must be in time order")
        last = d.at_h
        out.append(d)
    return tuple(out)
