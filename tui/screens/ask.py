"""Small dialogs that ask for a few values and return a dataclass.

Each field has its own labelled box with its unit; numbers are checked in
the dialog (the reason shows under the boxes and the dialog stays open), so
the caller receives typed values: never a line to split on ";".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Generic, TypeVar

from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

from ..form import read_number

__all__ = ["Ask", "AskScreen", "RecordAnswer", "TitrationAnswer", "record_dialog",
           "titration_dialog"]

T = TypeVar("T")


@dataclass(frozen=True)
class Ask:
    """One box of a dialog."""

    key: str
    label: str
    unit: str = ""
    number: bool = False         #: must read as a number (None when left empty)
    required: bool = False
    example: str = ""            #: shown greyed in the empty box
    value: str = ""              #: what the box holds when the dialog opens


@dataclass(frozen=True)
class RecordAnswer:
    """What the operator records with a decision (as ``dosing log add`` takes it)."""

    operator: str
    dosed: float | None          #: product given [kg per batch, or kg/h for a flow]
    ph_after: float | None
    note: str
    given: tuple[float, ...] | None = None   #: a train's: product given per dose step [kg]


@dataclass(frozen=True)
class TitrationAnswer:
    """A bench titration to scale: its file, sample volume and titrant."""

    path: str
    sample_ml: float
    titrant: str


class AskScreen(ModalScreen["T | None"], Generic[T]):
    """A title, labelled boxes, Enter to accept, Escape to cancel. Returns
    ``make(values)`` (values: str, or float/None for numbers), or None."""

    BINDINGS = [("escape", "cancel", "cancel")]

    def __init__(self, title: str, asks: list[Ask], make: Callable[[dict[str, Any]], T],
                 action: str = "accept"):
        super().__init__()
        self._title, self._asks, self._make, self._action = title, asks, make, action

    def compose(self) -> ComposeResult:
        with Vertical(id="ask-box"):
            yield Label(self._title, classes="section")
            for a in self._asks:
                with Horizontal(classes="row"):
                    yield Label(a.label, classes="label")
                    yield Input(a.value, id=f"ask-{a.key}", classes="value", compact=True,
                                placeholder=a.example)
                    yield Label(a.unit, classes="unit")
            error = Label("", id="ask-error", classes="error")
            error.display = False
            yield error
            yield Label(f"Enter to {self._action}, Escape to cancel, Tab for the next box",
                        classes="hint")

    @on(Input.Submitted)
    def _accept(self) -> None:
        values: dict[str, Any] = {}
        for a in self._asks:
            text = self.query_one(f"#ask-{a.key}", Input).value.strip()
            if a.required and not text:
                return self._refuse(f"{a.label}: missing; it is needed")
            if a.number and text:
                try:
                    values[a.key] = read_number(text)
                except ValueError as err:
                    why = str(err) if "could be" in str(err) else f"{text!r} is not a number"
                    return self._refuse(f"{a.label}: {why}")
            else:
                values[a.key] = text if text or not a.number else None
        try:
            answer = self._make(values)
        except ValueError as err:          # the maker's own check: the dialog stays open
            return self._refuse(str(err))
        self.dismiss(answer)

    def _refuse(self, why: str) -> None:
        error = self.query_one("#ask-error", Label)
        error.update(why)
        error.display = True

    def action_cancel(self) -> None:
        self.dismiss(None)


def record_dialog(per_hour: bool, dose_steps: tuple[int, ...] = ()) -> AskScreen[RecordAnswer]:
    """Ask who records the decision and, optionally, what was dosed (for a
    train, what each of its ``dose_steps`` was given)."""
    unit = "kg/h" if per_hour else "kg"
    if dose_steps:
        steps = ", ".join(map(str, dose_steps))
        dosed = Ask("given", "given", unit, example=f"optional: steps {steps}, e.g. 12.5, 0.4")
    else:
        dosed = Ask("dosed", "dosed", unit, number=True, example="optional")

    def make(v: dict[str, Any]) -> RecordAnswer:
        given = None
        if dose_steps and v.get("given"):
            try:
                given = tuple(float(x) for x in v["given"].replace(";", ",").split(",")
                              if x.strip())
            except ValueError:
                raise ValueError(f"given: {v['given']!r}; give one figure in {unit} for each "
                                 f"dose step ({steps}), separated by commas") from None
            if len(given) != len(dose_steps):
                raise ValueError(f"given: {len(given)} figures for {len(dose_steps)} dose "
                                 f"steps ({steps})")
        return RecordAnswer(v["operator"], v.get("dosed"), v["ph_after"], v["note"], given)
    return AskScreen("Record this decision in the shift log", [
        Ask("operator", "operator", required=True, example="your name"), dosed,
        Ask("ph_after", "pH after", number=True, example="optional"),
        Ask("note", "note", example="optional")], make, action="record")


def titration_dialog() -> AskScreen[TitrationAnswer]:
    """Ask for a bench titration's file, sample volume and titrant."""
    return AskScreen("Scale a bench titration with this scenario", [
        Ask("path", "file (CSV)", required=True, example="jar.csv"),
        Ask("sample_ml", "sample", "mL", number=True, required=True),
        Ask("titrant", "titrant", required=True, example="0.02 N H2SO4 or 0.1 M NaOH")],
        lambda v: TitrationAnswer(v["path"], v["sample_ml"], v["titrant"]),
        action="scale it")
