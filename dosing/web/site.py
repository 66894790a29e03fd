"""One site served: its folder of scenarios, its shift log, and a plan made
from a scenario with today's measurements typed into the page.

A scenario is named by its file's stem and looked up in the folder's own
listing, so no name typed into a request can reach outside the folder.
Today's measurements overlay the scenario's data and go through the same
validator as a file (the same one-line errors as the command line).
"""

from __future__ import annotations

import threading
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Mapping

from ..errors import InputError, ScenarioError
from ..io.site_log import SiteLog
from ..io.typed import parse_pairs, read_number

__all__ = ["Site", "FORM_FIELDS", "PAIR_FIELDS", "Planned", "scenario_form", "plan_text",
           "amount_field"]

#: The measurement boxes of the plan form: (form name, scenario key, label, unit).
FORM_FIELDS = (
    ("ph", "effluent.ph", "pH", ""),
    ("temperature_c", "effluent.temperature_c", "temperature", "°C"),
    ("alkalinity", "effluent.alkalinity_mg_l_as_caco3", "alkalinity", "mg/L as CaCO3"),
    ("acidity", "effluent.acidity_mg_l_as_caco3", "acidity", "mg/L as CaCO3"),
)
#: The name=value boxes: (form name, scenario key, label, unit).
PAIR_FIELDS = (
    ("metals", "effluent.metals_mg_l", "metals", "mg/L"),
    ("solutes", "effluent.solutes_mg_l", "solutes", "mg/L"),
)


def amount_field(data: Mapping[str, Any]) -> tuple[str, str, str]:
    """(scenario key, label, unit) of the tank volume or the flow."""
    if "flow" in data:
        return "flow.m3_per_h", "flow", "m³/h"
    return "batch.volume_m3", "tank volume", "m³"


def scenario_form(data: Mapping[str, Any]) -> dict[str, str]:
    """The plan form's boxes filled from a scenario's data (as typed text)."""
    out = {}
    for name, key, *_ in FORM_FIELDS + (("amount", amount_field(data)[0]),):
        section, field = key.split(".")
        v = data.get(section, {}).get(field)
        out[name] = "" if v is None else f"{v:g}"
    for name, key, *_ in PAIR_FIELDS:
        section, field = key.split(".")
        table = data.get(section, {}).get(field) or {}
        out[name] = ", ".join(f"{k}={v:g}" for k, v in table.items())
    return out


def _overlay(data: dict[str, Any], form: Mapping[str, str]) -> dict[str, Any]:
    """The scenario's data with the form's boxes written in (an empty box
    removes the key); a box that is not a number is an InputError naming it."""
    amount = amount_field(data)[0]
    for name, key, *_ in FORM_FIELDS + (("amount", amount),):
        text = (form.get(name) or "").strip()
        section, field = key.split(".")
        table = data.setdefault(section, {})
        if not text:
            table.pop(field, None)
            continue
        try:
            table[field] = read_number(text)
        except ValueError as err:
            raise InputError(key, str(err) if "could be" in str(err)
                             else f"{text!r} is not a number") from None
    for name, key, *_ in PAIR_FIELDS:
        text = (form.get(name) or "").strip()
        section, field = key.split(".")
        try:
            values = parse_pairs(text) if text else {}
        except ValueError as err:
            raise InputError(key, str(err)) from None
        table = data.setdefault(section, {})
        if values:
            table[field] = values
        else:
            table.pop(field, None)
    return data


@dataclass(frozen=True)
class Planned:
    """A plan made on the page: the scenario, its TOML as planned, the one-dose
    plan (None for a train scenario) and the train (given or proposed)."""

    name: str
    scenario: Any
    toml: str
    plan: Any
    train: Any


class Site:
    """The folder of scenarios and the shift log of one site.

    The log is one connection shared by the server's threads; :meth:`log`
    hands it out under a lock, so writes queue and nothing is lost.
    """

    def __init__(self, folder: str | Path, log_path: str | Path | None, *,
                 secure: bool = False, name: str = ""):
        self.folder = Path(folder).resolve()
        if not self.folder.is_dir():
            raise ScenarioError(str(folder), "", "is not a folder of scenarios")
        self.secure = secure
        self.name = name or self.folder.name
        self._log = SiteLog(log_path, shared=True)
        self._lock = threading.RLock()
        #: matplotlib's figure state is not thread-safe: one figure at a time.
        self.figure_lock = threading.Lock()

    @contextmanager
    def log(self) -> Iterator[SiteLog]:
        with self._lock:
            yield self._log

    def close(self) -> None:
        with self._lock:
            self._log.close()

    # ---------------------------------------------------------- scenarios --
    def scenarios(self) -> dict[str, Path]:
        """Stem -> path of each scenario file directly in the folder."""
        out = {}
        for p in sorted(self.folder.glob("*.toml")):
            if p.is_file() and not p.is_symlink() and p.resolve().parent == self.folder:
                out[p.stem] = p
        return out

    def path_of(self, name: str) -> Path | None:
        """The file of a scenario named in a request; None if the folder has none."""
        return self.scenarios().get(name)

    def text_of(self, name: str) -> str:
        from ..io.scenario import read_text_file
        path = self.path_of(name)
        if path is None:
            raise ScenarioError(name, "", "no such scenario in this site's folder")
        return read_text_file(path)

    def plan(self, name: str, form: Mapping[str, str] | None) -> Planned:
        """Plan scenario ``name`` with the form's measurements (None: as filed)."""
        return plan_text(name, self.text_of(name), form)

    def save_scenario(self, name: str, text: str) -> str:
        """Replace a scenario's text after checking it reads as a scenario;
        returns the text it replaced (kept in the audit)."""
        from ..io.files import write_atomic
        from ..io.scenario import parse_scenario
        old = self.text_of(name)
        parse_scenario(text, f"{name}.toml")                # refused before any write
        write_atomic(self.path_of(name), text.encode("utf-8"))
        return old


def plan_text(name: str, text: str, form: Mapping[str, str] | None) -> Planned:
    """Plan a scenario's TOML text (the form's measurements written in, if given)."""
    from ..io.scenario import build_scenario, parse_toml, scenario_to_toml
    from ..planning.job import make_plan
    from ..planning.train_job import make_train
    label = f"{name}.toml"
    data = parse_toml(text, label)
    if form is not None and "effluent" in data:
        data = _overlay(data, form)
    scenario = build_scenario(data, label)
    plan = None if scenario.train else make_plan(scenario)
    train = make_train(scenario, plan)
    toml = text if form is None else scenario_to_toml(data, text)
    return Planned(name, scenario, toml, plan, train)

