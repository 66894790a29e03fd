"""The help screen."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Markdown

from dosing.planning.reagents import GENERAL_CAUTION

HELP = f"""\
# Tankside, neutralisation dosing

Change any value on the left: the dose is planned again at once.

| key | does |
|---|---|
| Tab / Shift+Tab | next / previous field |
| F2 F3 F4 F5 F9 F10 | Dose, Curve, Sweep, Sheet, Train and Trend views (or click a tab) |
| PgUp / PgDn | scroll the view on the right (wherever the cursor is) |
| Ctrl+O | open a scenario file |
| Ctrl+S | save the scenario (TOML, same as `dosing plan` reads) |
| F6 | units: metric or US |
| F7 | record this decision in the shift log (operator, what was dosed, pH after, note) |
| F8 | scale a bench titration (file, sample mL, titrant) with this scenario |
| F1 | this help |
| Ctrl+Q | quit |

**Fields.** Metals, solutes (mg/L or mmol/L) and background ions are
rows: change a value to change it, clear it to remove the row, and type
`name=value` in the *add* box (several separated by `;`), then Enter, to
add rows; `dosing solutes` lists the solute names. A decimal comma (`2,8`)
is read as a decimal. Leave
alkalinity or acidity empty if the lab did not measure it (give one, not
both). Choose *custom product* to enter your own strength and density.

**When a value is wrong** the reason shows under the field in red and the
last valid plan stays on screen, marked as such.

**Sweep** shows the product for tank sizes (or flows) around yours at each
strength it is sold or made up at, and the product in *compare with*
beside it (`dosing sweep` prints the same grid, and writes it as CSV).

**Trend** (F10, a continuous stream only) simulates four hours of made-up
disturbances through one stage and two (tanks, probe, pump and
controller) and draws the discharge pH of each against the window, with
the comparison under it; `dosing simulate` runs longer records, logged
data and more designs.

**F6** switches the units of the fields too: °F, gallons or gpm, lb/gal and
price per lb; the file keeps SI units.

{GENERAL_CAUTION}

Press Escape to close.
"""


class HelpScreen(ModalScreen[None]):
    """Key hints and how Tankside reads its fields."""

    BINDINGS = [("escape", "dismiss", "close"), ("f1", "dismiss", "close")]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Markdown(HELP)
