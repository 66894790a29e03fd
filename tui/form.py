"""The scenario form: plain data in and out, no chemistry.

:class:`ScenarioForm` shows the fields an operator changes most and turns
them into scenario data (the same dictionary a TOML file parses to). Keys
the form does not show (site, permit caps, storage ...) are kept from the
loaded scenario, so nothing is lost on save.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.widgets import Input, Label, Select, Static, Switch

from dosing.chem.activity import AUTO, DEFAULT_CHOICE, MODELS
from dosing.planning.reagents import CATALOGUE, COMPOUNDS
from dosing.report.units import KG_PER_LB, L_PER_US_GAL, UnitSystem

from .widgets.pairs import PairsBox, pairs_id, parse_pairs, read_number

__all__ = ["Field", "FIELDS", "PAIRS", "ScenarioForm", "field_id", "parse_pairs", "read_number",
           "US_FIELDS"]


@dataclass(frozen=True)
class Field:
    """One number or text box of the form."""

    key: str          #: dotted scenario key
    label: str
    unit: str = ""
    section: str = "effluent"   #: the form section it shows in


FIELDS = (
    Field("effluent.ph", "pH", ""),
    Field("effluent.temperature_c", "temperature", "°C"),
    Field("effluent.alkalinity_mg_l_as_caco3", "alkalinity", "mg/L CaCO3"),
    Field("effluent.acidity_mg_l_as_caco3", "acidity", "mg/L CaCO3"),
    Field("basis.amount", "volume", "m³", section="tank"),
    Field("target.ph_min", "pH min", section="window"),
    Field("target.ph_max", "pH max", section="window"),
    Field("target.ph_aim", "pH aim", section="window"),
    Field("reagent.mass_fraction", "strength", "mass fraction", section="reagent"),
    Field("reagent.density_kg_l", "density", "kg/L", section="reagent"),
    Field("reagent.price_per_kg", "price", "per kg", section="reagent"),
)


#: The [effluent] tables shown as rows: key, title, unit, an example entry.
PAIRS = (
    ("effluent.metals_mg_l", "metals", "mg/L", "e.g. zinc=2.5"),
    ("effluent.solutes_mg_l", "solutes", "mg/L", "e.g. sulfate=650"),
    ("effluent.solutes_mmol_l", "solutes", "mmol/L", "e.g. acetate=3"),
    ("effluent.ions_mg_l", "background ions", "mg/L", "e.g. sodium=40"),
)


@dataclass(frozen=True)
class Shown:
    """How a field reads in US units: its unit and the conversions from and
    to the SI value a scenario file holds."""

    unit: str
    from_si: Any
    to_si: Any
    digits: int = 6     #: significant digits shown (the exact value is kept)


_LB_GAL_PER_KG_L = L_PER_US_GAL / KG_PER_LB        # 8.345 lb/gal per kg/L
#: Fields that read differently in US units (NIST SP 811 factors, exact).
US_FIELDS = {
    "effluent.temperature_c": Shown("°F", lambda c: c * 1.8 + 32.0, lambda f: (f - 32.0) / 1.8),
    "batch.volume_m3": Shown("gal", lambda m3: m3 * 1000.0 / L_PER_US_GAL,
                             lambda gal: gal * L_PER_US_GAL / 1000.0, digits=5),
    "flow.m3_per_h": Shown("gpm", lambda q: q * 1000.0 / L_PER_US_GAL / 60.0,
                           lambda gpm: gpm * 60.0 * L_PER_US_GAL / 1000.0, digits=5),
    "reagent.density_kg_l": Shown("lb/gal", lambda d: d * _LB_GAL_PER_KG_L,
                                  lambda d: d / _LB_GAL_PER_KG_L),
    "reagent.price_per_kg": Shown("per lb", lambda p: p * KG_PER_LB, lambda p: p / KG_PER_LB,
                                  digits=4),
}


def _in_section(section: str) -> tuple[Field, ...]:
    """The fields of one form section, in order."""
    return tuple(f for f in FIELDS if f.section == section)


def field_id(key: str) -> str:
    """Widget id of the field for a scenario key."""
    return "f-" + key.replace(".", "--").replace("_", "-")


def _fmt(v: Any) -> str:
    if isinstance(v, dict):
        return ", ".join(f"{k}={x:g}" for k, x in v.items())
    return "" if v is None else f"{v:g}" if isinstance(v, (int, float)) else str(v)


class ScenarioForm(VerticalScroll):
    """Fields of a scenario; posts :class:`ScenarioForm.Edited` on every change."""

    @dataclass
    class Edited(Message):
        """The operator changed a field."""

        form: "ScenarioForm"

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self._base: dict[str, Any] = {}
        #: "metric" or "us": the units the fields are shown and typed in.
        self.units: UnitSystem = "metric"
        #: key -> (text shown, SI value) for converted fields, so a value
        #: nobody retyped goes back to the file exactly as it came.
        self._shown: dict[str, tuple[str, float]] = {}

    def compose(self) -> ComposeResult:
        yield Static("Effluent", classes="section")
        for f in _in_section("effluent"):
            yield from self._row(f)
        for key, title, unit, example in PAIRS:
            yield PairsBox(key, title, unit, example)
        yield Static("", classes="kept", id="kept-effluent")
        yield Static("Tank or flow", classes="section")
        with Horizontal(classes="row"):
            yield Label("treat as", classes="label")
            yield Select([("batch (tank)", "batch"), ("continuous flow", "flow")],
                         value="batch", allow_blank=False, id="f-basis--mode", compact=True,
                         classes="value")
        for f in _in_section("tank"):
            yield from self._row(f)
        yield Static("Permit window", classes="section")
        for f in _in_section("window"):
            yield from self._row(f)
        yield Static("Reagent", classes="section")
        note = Static("", id="train-note", classes="kept")
        note.display = False
        yield note
        with Horizontal(classes="row reagent"):
            yield Label("product", classes="label")
            # The product's name, as on the drum; its id is what a file stores.
            options = [(r.name, r.id) for r in CATALOGUE.values()]
            options.append(("custom product ...", "custom"))
            yield Select(options, value="caustic-50", allow_blank=False, compact=True,
                         id="f-reagent--id", classes="value")
        with Horizontal(classes="row custom reagent"):
            yield Label("compound", classes="label")
            yield Select([(c, c) for c in COMPOUNDS], value="NaOH", allow_blank=False,
                         compact=True,
                         id="f-reagent--compound", classes="value")
        for f in _in_section("reagent"):
            yield from self._row(f, "custom reagent" if f.key != "reagent.price_per_kg"
                                 else "reagent")
        yield Static("Model", classes="section")
        with Horizontal(classes="row"):
            yield Label("activity", classes="label")
            yield Select([("auto (Davies; SIT past 0.5 mol/L)", AUTO)]
                         + [(m.label, m.name) for m in MODELS.values()], value=DEFAULT_CHOICE,
                         allow_blank=False, id="f-model--activity", classes="value", compact=True)
        with Horizontal(classes="row"):
            yield Label("open to air", classes="label")
            yield Switch(value=False, id="f-model--open-to-air")

    def set_train(self, steps: list | None) -> None:
        """Grey out what a train does not read: the reagent (each dose step names
        its product) and, for a train that starts with a blend, the water and
        the amount (the streams give them)."""
        blend = bool(steps) and steps[0].get("kind") == "blend"
        unused = ("reagent.",) if steps else ()
        if blend:
            unused += ("effluent.", "basis.")
        for f in FIELDS:
            self.query_one("#" + field_id(f.key), Input).disabled = f.key.startswith(unused)
        for key, *_ in PAIRS:
            for box in self.query_one("#" + pairs_id(key), PairsBox).query(Input):
                box.disabled = blend
        for sid in ("#f-reagent--id", "#f-reagent--compound"):
            self.query_one(sid, Select).disabled = bool(steps)
        # Each step names its product: the reagent rows go (tankside.tcss).
        self.set_class(bool(steps), "train")
        self._show_custom(self.query_one("#f-reagent--id", Select).value == "custom")
        note = self.query_one("#train-note", Static)
        note.display = bool(steps)
        note.update("a treatment train: each dose step names its product (F9)"
                    + ("; the blend's streams give the water and the amount" if blend else ""))

    def _row(self, f: Field, extra: str = "") -> ComposeResult:
        with Horizontal(classes=f"row {extra}".strip()):
            yield Label(f.label, classes="label", id=field_id(f.key) + "-label")
            yield Input(id=field_id(f.key), classes="value", compact=True)
            yield Label(f.unit, classes="unit", id=field_id(f.key) + "-unit")
        error = Label("", classes="error", id=field_id(f.key) + "-error")
        error.display = False
        yield error

    # --------------------------------------------------------------- data --
    def load_data(self, data: dict[str, Any]) -> None:
        """Fill the form from scenario data (no Edited messages: the caller plans)."""
        # Textual's message prevention: the boxes changed here post no
        # Changed messages (a flag reset before they arrived did not stop them).
        with self.prevent(Input.Changed, Select.Changed, Switch.Changed):
            self._fill(data)

    def _fill(self, data: dict[str, Any]) -> None:
        self._base = copy.deepcopy(data)
        flow = "flow" in data
        self.query_one("#f-basis--mode", Select).value = "flow" if flow else "batch"
        amount = data.get("flow", {}).get("m3_per_h") if flow else \
            data.get("batch", {}).get("volume_m3")
        self._shown = {}
        self._put("basis.amount", amount)
        self._label_amount(flow)
        for f in FIELDS:
            if f.key == "basis.amount":
                continue
            section, key = f.key.split(".")
            self._put(f.key, data.get(section, {}).get(key))
        r = data.get("reagent", {})
        rid = r.get("id", "custom")
        self.query_one("#f-reagent--id", Select).value = rid if rid in CATALOGUE \
            else "custom"
        if r.get("compound") in COMPOUNDS:
            self.query_one("#f-reagent--compound", Select).value = r["compound"]
        m = data.get("model", {})
        self.query_one("#f-model--activity", Select).value = m.get("activity", DEFAULT_CHOICE)
        self.query_one("#f-model--open-to-air", Switch).value = bool(
            m.get("open_to_air", False))
        self._show_custom(rid not in CATALOGUE)
        self.query_one("#" + field_id("reagent.price_per_kg") + "-unit", Label).update(
            self._unit("reagent.price_per_kg", "per kg"))
        eff = data.get("effluent", {})
        for key, *_ in PAIRS:
            self.query_one("#" + pairs_id(key), PairsBox).set_values(eff.get(key.split(".")[1]))
        shown = {f.key.split(".")[1] for f in FIELDS if f.key.startswith("effluent.")}
        shown |= {key.split(".")[1] for key, *_ in PAIRS}
        kept = {k: v for k, v in data.get("effluent", {}).items() if k not in shown}
        note = self.query_one("#kept-effluent", Static)
        note.update("kept from the file: " + "; ".join(f"{k} {_fmt(v)}"
                                                     for k, v in kept.items())
                    if kept else "")
        note.display = bool(kept)

    def to_data(self) -> tuple[dict[str, Any], dict[str, str]]:
        """Scenario data from the form, and field errors found while reading it.

        Numbers that do not parse are reported here (key -> reason); the
        scenario validator reports the rest.
        """
        data = copy.deepcopy(self._base)
        errors: dict[str, str] = {}
        for name in ("effluent", "target", "reagent", "model"):
            data.setdefault(name, {})
        for f in FIELDS:
            text = self.query_one("#" + field_id(f.key), Input).value.strip()
            if f.key == "basis.amount":
                continue
            section, key = f.key.split(".")
            if not text:
                data[section].pop(key, None)
                continue
            try:
                data[section][key] = self._get(f.key, text)
            except ValueError as err:
                errors[f.key] = (str(err) if "could be" in str(err)
                                 else f"{text!r} is not a number")
        self._pairs_to_data(data["effluent"], errors)
        self._basis_to_data(data, errors)
        self._reagent_to_data(data["reagent"])
        self._model_to_data(data)
        return data, errors

    def _pairs_to_data(self, effluent: dict[str, Any], errors: dict[str, str]) -> None:
        """The metals, solutes and ions rows; an emptied table leaves the file."""
        for key, *_ in PAIRS:
            values, why = self.query_one("#" + pairs_id(key), PairsBox).read()
            name = key.split(".")[1]
            if why:
                errors[key] = why
            elif values is None:
                effluent.pop(name, None)
            else:
                effluent[name] = values

    def _basis_to_data(self, data: dict[str, Any], errors: dict[str, str]) -> None:
        """The tank or flow section: one of [batch] volume_m3 or [flow] m3_per_h."""
        mode = self.query_one("#f-basis--mode", Select).value
        amount_text = self.query_one("#" + field_id("basis.amount"), Input).value.strip()
        other = "batch" if mode == "flow" else "flow"
        old_flow = data.pop(other, {})
        section = data.setdefault(mode, {})
        if mode == "flow" and "hours_per_day" in old_flow:
            section["hours_per_day"] = old_flow["hours_per_day"]
        key = "m3_per_h" if mode == "flow" else "volume_m3"
        for k in ("m3_per_h", "volume_m3"):
            if k != key:
                section.pop(k, None)
        try:
            section[key] = self._get("basis.amount", amount_text)
        except ValueError as err:
            errors["basis.amount"] = (
                str(err) if "could be" in str(err) else f"{amount_text!r} is not a number"
                if amount_text else "missing; give the tank volume or the flow")

    def _reagent_to_data(self, r: dict[str, Any]) -> None:
        """The reagent section: a catalogue id, or a custom compound."""
        rid = self.query_one("#f-reagent--id", Select).value
        if rid == "custom":
            r.pop("id", None)
            r.pop("purity", None)
            r["compound"] = self.query_one("#f-reagent--compound", Select).value
            return
        for k in ("compound", "mass_fraction", "density_kg_l", "molarity_mol_l", "form"):
            r.pop(k, None)
        r["id"] = rid
        if CATALOGUE[rid].form == "liquid":
            r.pop("purity", None)
        else:
            r.pop("storage_m3", None)

    def _model_to_data(self, data: dict[str, Any]) -> None:
        """The model section; a default the file did not write is not added
        (saving keeps the file as it was)."""
        m = data["model"]
        base_model = self._base.get("model", {})
        for key, value, default in (
                ("activity", self.query_one("#f-model--activity", Select).value, DEFAULT_CHOICE),
                ("open_to_air", self.query_one("#f-model--open-to-air", Switch).value, False)):
            if value == default and key not in base_model:
                m.pop(key, None)
            else:
                m[key] = value
        if not m and "model" not in self._base:
            data.pop("model")

    def show_errors(self, errors: dict[str, str]) -> None:
        """Show each error beside its field; clear the others."""
        for f in FIELDS:
            label = self.query_one("#" + field_id(f.key) + "-error", Label)
            label.update(errors.get(f.key, ""))
            label.display = f.key in errors
            self.query_one("#" + field_id(f.key), Input).set_class(f.key in errors, "bad")
        for key, *_ in PAIRS:
            self.query_one("#" + pairs_id(key), PairsBox).show_error(errors.get(key, ""))

    # ------------------------------------------------------------ events --
    def _label_amount(self, flow: bool) -> None:
        self.query_one("#" + field_id("basis.amount") + "-label", Label).update(
            "flow" if flow else "volume")
        self.query_one("#" + field_id("basis.amount") + "-unit", Label).update(
            self._unit("basis.amount", "m³/h" if flow else "m³"))

    # ------------------------------------------------------------- units --
    def _unit_key(self, key: str) -> str:
        """The key whose US conversion a field uses (the amount's depends on the mode)."""
        if key != "basis.amount":
            return key
        flow = self.query_one("#f-basis--mode", Select).value == "flow"
        return "flow.m3_per_h" if flow else "batch.volume_m3"

    def _unit(self, key: str, metric: str) -> str:
        conv = US_FIELDS.get(self._unit_key(key))
        unit = conv.unit if self.units == "us" and conv else metric
        currency = self._base.get("currency") if key == "reagent.price_per_kg" else None
        return f"{currency} {unit}" if isinstance(currency, str) and currency else unit

    def _put(self, key: str, si_value: Any) -> None:
        """Show a scenario value in the form's units."""
        conv = US_FIELDS.get(self._unit_key(key))
        text = _fmt(si_value)
        if self.units == "us" and conv and isinstance(si_value, (int, float)):
            text = _fmt(float(f"{conv.from_si(si_value):.{conv.digits}g}"))
            self._shown[key] = (text, si_value)
        self.query_one("#" + field_id(key), Input).value = text

    def _get(self, key: str, text: str) -> float:
        """A typed number in SI units; raises ValueError if it is no number."""
        conv = US_FIELDS.get(self._unit_key(key))
        if self.units != "us" or not conv:
            return read_number(text)
        shown = self._shown.get(key)
        if shown and shown[0] == text:
            return shown[1]          # not retyped: the file's value, exactly
        return conv.to_si(read_number(text))

    def set_units(self, units: UnitSystem) -> None:
        """Show and read the fields in ``units`` ("metric" or "us"): each
        converted field keeps its value, its text and unit label follow."""
        if units == self.units:
            return
        values = {}
        for key in (f.key for f in FIELDS if self._unit_key(f.key) in US_FIELDS):
            text = self.query_one("#" + field_id(key), Input).value.strip()
            try:
                values[key] = self._get(key, text) if text else None
            except ValueError:
                values[key] = text          # left as typed: its error stays shown
        self.units = units
        self._shown = {}
        # The values do not change, only how they read: no Edited messages.
        with self.prevent(Input.Changed):
            for key, value in values.items():
                if isinstance(value, str):
                    self.query_one("#" + field_id(key), Input).value = value
                else:
                    self._put(key, value)
        for f in FIELDS:
            if f.key != "basis.amount":
                self.query_one("#" + field_id(f.key) + "-unit", Label).update(
                    self._unit(f.key, f.unit))
        self._label_amount(self.query_one("#f-basis--mode", Select).value == "flow")

    def _show_custom(self, custom: bool) -> None:
        # A train names its products in its steps: no custom-product rows then.
        for w in self.query(".custom"):
            w.display = custom and not self.has_class("train")

    def _edited(self) -> None:
        self.post_message(self.Edited(self))

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        self._edited()

    def on_select_changed(self, event: Select.Changed) -> None:
        event.stop()
        if event.select.id == "f-basis--mode":
            # The number stays and now means a flow (or a volume): in US units
            # the value it was converted from no longer applies.
            self._shown.pop("basis.amount", None)
            self._label_amount(event.value == "flow")
        if event.select.id == "f-reagent--id":
            self._show_custom(event.value == "custom")
            self._forget_product_terms(event.value)
        self._edited()

    def _forget_product_terms(self, rid: str) -> None:
        """A new product does not inherit the old one's price or storage."""
        r = self._base.get("reagent", {})
        if r.get("id") == rid:
            return
        for key in ("price_per_kg", "storage_m3", "storage_kg"):
            r.pop(key, None)
        box = self.query_one("#" + field_id("reagent.price_per_kg"), Input)
        box.value = ""

    def on_switch_changed(self, event: Switch.Changed) -> None:
        event.stop()
        self._edited()
