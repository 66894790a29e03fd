"""A bench titration: the titrant, the curve as read, and its direct scaling to full scale.

An operator titrates a sample (``sample_ml`` of effluent) with a titrant of
known strength and reads the pH after each addition. :func:`check_curve`
refuses what no real curve shows (volumes going back, a misread, a second
titrant) naming the row; :func:`direct_scaling` is the model-free dose: a
monotone PCHIP interpolation of the titrant volume against pH gives the
volume at the aim and at the window edges, scaled by tank-to-sample volume
and by equivalents of titrant to product.

References
----------
Fritsch, F. N.; Carlson, R. E. (1980). Monotone piecewise cubic
interpolation. SIAM J. Numer. Anal. 17, 238-246 (scipy's PchipInterpolator).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import PchipInterpolator

from ..chem import ReagentVector
from ..errors import InputError, UnreachableError
from .basis import Target
from .findings import Finding, Q, note
from .reagents import COMPOUNDS, Compound, Reagent, get_reagent

__all__ = ["Titrant", "parse_titrant", "BenchCurve", "check_curve", "DirectScaling",
           "direct_scaling", "MISREAD_PH", "MIN_POINTS", "equivalents_per_mol"]


#: A pH step against the titrant's direction larger than this is a misread
#: (smaller ones are meter noise and are flagged) [pH] (common practice).
MISREAD_PH = 0.05


MIN_POINTS = 5


def equivalents_per_mol(compound: Compound) -> float | None:
    """Strong acid or base equivalents one mole delivers [eq/mol].

    None for CO2, whose acid strength depends on the pH.
    """
    if compound.formula == "CO2":
        return None
    if compound.raises_ph:
        # Sodium and potassium count as strong ions; calcium and magnesium
        # enter as metals, two equivalents each (Ca(OH)2, CaO, Mg(OH)2,
        # CaCO3 to CO2).
        divalent = compound.adds.get("calcium", 0.0) + compound.adds.get("magnesium", 0.0)
        return compound.strong_eq + 2.0 * divalent
    if "sulfate" in compound.adds:
        return 2.0          # H2SO4: both protons, above about pH 3
    return -compound.strong_eq


@dataclass(frozen=True)
class Titrant:
    """The bench titrant: compound and molarity [mol/L]."""

    compound: Compound
    molarity_mol_l: float
    label: str

    def vector(self) -> ReagentVector:
        return self.compound.vector(1.0 / self.molarity_mol_l)

    @property
    def normality_eq_l(self) -> float:
        return self.molarity_mol_l * equivalents_per_mol(self.compound)


_STRENGTH = re.compile(r"^\s*(?:(?P<n1>[\d.]+)\s*(?P<u1>[MN])\s+(?P<c1>\S+)"
                       r"|(?P<c2>[A-Za-z()0-9]+)\s*[:\s]\s*(?P<n2>[\d.]+)\s*(?P<u2>[MN]?))\s*$")


def parse_titrant(text: str) -> Titrant:
    """A titrant from a catalogue id or a strength: ``0.1 M NaOH``,
    ``0.02 N H2SO4``, ``HCl:0.1`` (molar).
    """
    text = text.strip()
    try:
        r = get_reagent(text)
    except InputError:
        r = None
    if r is not None:
        if r.litres_product_per_mol is None:
            raise InputError("titrant", f"{text} is not a solution; titrate with a "
                             "solution of known strength")
        return Titrant(r.compound, 1.0 / r.litres_product_per_mol, r.name)
    m = _STRENGTH.match(text)
    if not m:
        raise InputError("titrant", f"{text!r}: give a catalogue id or a strength "
                         "such as '0.1 M NaOH', '0.02 N H2SO4' or 'HCl:0.1'")
    comp = m.group("c1") or m.group("c2")
    try:
        value = float(m.group("n1") or m.group("n2"))
    except ValueError:
        raise InputError("titrant", f"{text!r}: the strength is not a number; write it "
                         "as '0.1 M NaOH', '0.02 N H2SO4' or 'HCl:0.1'") from None
    unit = m.group("u1") or m.group("u2") or "M"
    if comp not in COMPOUNDS:
        raise InputError("titrant", f"unknown compound {comp!r}; allowed: "
                         + ", ".join(COMPOUNDS))
    c = COMPOUNDS[comp]
    eq = equivalents_per_mol(c)
    if eq is None:
        raise InputError("titrant", "CO2 is not a titrant; use a strong acid")
    molarity = value / eq if unit == "N" else value
    if not 1e-4 <= molarity <= 20:
        raise InputError("titrant", f"{value:g} {unit} is not a plausible titrant "
                         "strength; allowed: 0.0001 to 20 mol/L")
    return Titrant(c, molarity, f"{molarity:g} M {comp}")


def _refuse_back_titration(q: np.ndarray, rows, titrant: Titrant, source: str) -> None:
    """Refuse a curve whose pH turns and runs back for good: a second titrant.

    ``q`` is the pH signed so that the titrant raises it. Three or more
    readings in a row going back, by more than 0.5 pH in all, is not meter
    noise or one misread.
    """
    top = int(np.argmax(q))
    tail = q[top:]
    if tail.size >= 4 and np.all(np.diff(tail) < 0) and q[top] - tail[-1] > 0.5:
        raise InputError(source, f"the pH turns at row {rows[top]} and runs back "
                         f"{q[top] - tail[-1]:.1f} pH over the last {tail.size - 1} readings "
                         f"while {titrant.label} is added: a back titration with a second "
                         "titrant is not taken. Give each titrant's curve in its own file")


def _misread_suspects(q: np.ndarray, i: int) -> list[int]:
    """Which of points ``i`` and ``i + 1`` breaks the trend of ``q`` (rising).

    A spike up at ``i`` is the misread when leaving it out puts its
    neighbours back in order; a dip at ``i + 1`` likewise. When both (or
    neither) would, both are named.
    """
    fits_without_i = (i == 0 or q[i - 1] <= q[i + 1] + MISREAD_PH)
    fits_without_next = (i + 2 >= q.size or q[i] <= q[i + 2] + MISREAD_PH)
    if fits_without_i and not fits_without_next:
        return [i]
    if fits_without_next and not fits_without_i:
        return [i + 1]
    return [i, i + 1]


@dataclass(frozen=True)
class BenchCurve:
    """A checked bench titration (volumes increasing, pH monotone)."""

    sample_ml: float
    titrant: Titrant
    added_ml: np.ndarray
    ph: np.ndarray
    rows: np.ndarray                 #: file row number of each point
    notes: tuple[Finding, ...] = field(default=())


#: A curve whose pH moves no more than this [pH] over the whole titration
#: carries no information about the water (a dead meter, water as titrant).
FLAT_PH = 0.05


def check_curve(sample_ml: float, titrant: Titrant, added_ml, ph, rows=None,
                source: str = "titration") -> BenchCurve:
    """Validate a titration; raises InputError with the row at fault."""
    v = np.asarray(added_ml, dtype=float)
    p = np.asarray(ph, dtype=float)
    rows = np.arange(1, v.size + 1) if rows is None else np.asarray(rows)
    if not (math.isfinite(sample_ml) and 1.0 <= sample_ml <= 1e5):
        raise InputError("sample_ml", f"{sample_ml:g}; allowed: 1 to 100,000 mL")
    bad = ~np.isfinite(v) | ~np.isfinite(p)
    if bad.any():
        raise InputError(source, "rows with a missing or unreadable number: "
                         + ", ".join(str(r) for r in rows[bad][:10])
                         + "; fix or delete them (nothing is guessed)")
    if v.size < MIN_POINTS:
        raise InputError(source, f"{v.size} points; a titration needs at least "
                         f"{MIN_POINTS}")
    if np.any(v < 0) or np.any((p < 0) | (p > 14)):
        raise InputError(source, "volumes must be 0 or more mL and pH 0 to 14")
    dv = np.diff(v)
    if np.any(dv == 0):
        i = int(np.flatnonzero(dv == 0)[0])
        raise InputError(source, f"rows {rows[i]} and {rows[i + 1]} have the same "
                         f"volume {v[i]:g} mL; keep one reading per addition")
    if np.any(dv < 0):
        i = int(np.flatnonzero(dv < 0)[0])
        raise InputError(source, f"volume goes down at row {rows[i + 1]} "
                         f"({v[i]:g} -> {v[i + 1]:g} mL); the titrant added must be "
                         "cumulative")
    if v[-1] > 10 * sample_ml:
        raise InputError(source, f"{v[-1]:g} mL of titrant for a {sample_ml:g} mL "
                         "sample: the volumes look like the wrong unit; give mL")
    direction = 1.0 if titrant.compound.raises_ph else -1.0
    if p.max() - p.min() <= FLAT_PH or (p[-1] - p[0]) * direction <= FLAT_PH:
        raise InputError(source, f"the pH does not move ({p.min():g} to {p.max():g} over "
                         f"{v[-1] - v[0]:g} mL of {titrant.label}): check the titrant "
                         "and the meter")
    _refuse_back_titration(p * direction, rows, titrant, source)
    dp = np.diff(p) * direction
    notes: list[Finding] = []
    if np.any(dp < -MISREAD_PH):
        i = int(np.flatnonzero(dp < -MISREAD_PH)[0])
        verb = "falls" if direction > 0 else "rises"
        suspect = " or ".join(str(rows[k]) for k in _misread_suspects(p * direction, i))
        raise InputError(source, f"pH {verb} from {p[i]:g} (row {rows[i]}) to {p[i + 1]:g} "
                         f"(row {rows[i + 1]}) while {titrant.label} is added: row "
                         f"{suspect} looks misread. Fix the reading or drop that row "
                         "(--drop ROW)")
    small = np.flatnonzero(dp < 0)
    if small.size:
        notes.append(note("meter-noise", "pH readings against the trend by up to "
                          "{misread:gnum} at rows {rows}: taken as meter noise and held "
                          "level for the interpolation", "info",
                          {"rows": ", ".join(str(rows[i + 1]) for i in small)},
                          misread=Q(MISREAD_PH, "pH")))
    if v[0] != 0:
        notes.append(note("no-first-reading", "the first reading is at {first_ml:g}, not 0: "
                          "the sample's own pH is not in the data", "info",
                          first_ml=Q(float(v[0]), "mL")))
    return BenchCurve(float(sample_ml), titrant, v, p, rows, tuple(notes))


@dataclass(frozen=True)
class DirectScaling:
    """Model-free result of the curve."""

    ml_at_aim: float
    ml_at_edges: tuple[float | None, float | None]   #: at ph_min, ph_max
    eq_per_l: float                    #: titrant equivalents per L of effluent
    dose_mol_l: float | None           #: full-scale reagent, mol active per L
    band_mol_l: tuple[float | None, float | None]
    interpolant: PchipInterpolator     #: volume [mL] as a function of pH
    notes: tuple[Finding, ...]


def _monotone_ph(curve: BenchCurve) -> np.ndarray:
    direction = 1.0 if curve.titrant.compound.raises_ph else -1.0
    return direction * np.maximum.accumulate(direction * curve.ph)


def direct_scaling(curve: BenchCurve, reagent: Reagent, target: Target) -> DirectScaling:
    """Titrant volume at the aim and window edges, scaled to the reagent."""
    p = _monotone_ph(curve)
    keep = np.concatenate([[True], np.diff(p) != 0])     # PCHIP needs strict order
    x, y = p[keep], curve.added_ml[keep]
    if curve.titrant.compound.raises_ph != reagent.raises_ph:
        raise InputError("titrant", f"the titrant {curve.titrant.label} and the "
                         f"reagent {reagent.name} push the pH opposite ways")
    if x[0] > x[-1]:
        x, y = x[::-1], y[::-1]
    f = PchipInterpolator(x, y, extrapolate=False)
    last = curve.ph[-1]
    lo, hi = float(x[0]), float(x[-1])
    aim = target.ph_aim
    if not lo <= aim <= hi:
        raise UnreachableError(
            f"the titration does not reach the aim pH {aim:g}: it ends at pH {last:g} "
            f"after {curve.added_ml[-1]:g} mL (range pH {lo:g} to {hi:g}); no "
            "extrapolation is made. Extend the titration past the aim")
    notes = []

    def ml(ph):
        if lo <= ph <= hi:
            return float(f(ph))
        notes.append(note("edge-not-titrated", "the curve does not reach pH {ph:g}, so that "
                          "edge of the window has no volume", "warning", ph=Q(ph, "pH")))
        return None

    v_aim = ml(aim)
    edges = (ml(target.ph_min), ml(target.ph_max))
    eq_per_l_at = lambda v_ml: (None if v_ml is None else
                                v_ml / 1000.0 * curve.titrant.normality_eq_l
                                / (curve.sample_ml / 1000.0))
    eq_r = equivalents_per_mol(reagent.compound)
    if eq_r == 0.0:
        raise InputError("reagent", f"{reagent.name} delivers no acid or base equivalents: "
                         "it is not a pH reagent; allowed: a catalogue acid or base")
    if eq_r is None:
        notes.append(note("no-equivalents", "{reagent} cannot be scaled by equivalents (its "
                          "strength as an acid depends on the pH): use the model dose",
                          "warning", {"reagent": reagent.name}))
        to_mol = lambda e: None
    else:
        to_mol = lambda e: None if e is None else e / eq_r
    if curve.titrant.compound.formula != reagent.compound.formula:
        notes.append(note("titrant-differs", "titrant {titrant} and reagent {compound} differ: "
                          "direct scaling by equivalents ignores the carbonate, sulfate or "
                          "calcium the product brings", "info",
                          {"titrant": curve.titrant.compound.formula,
                           "compound": reagent.compound.formula}))
    band = sorted(m for m in (to_mol(eq_per_l_at(e)) for e in edges) if m is not None)
    band_t = (band[0] if band else None, band[1] if len(band) > 1 else None)
    return DirectScaling(v_aim, edges, eq_per_l_at(v_aim), to_mol(eq_per_l_at(v_aim)),
                         band_t, f, tuple(notes))
