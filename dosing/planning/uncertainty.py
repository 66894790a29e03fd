"""How sure the dose is, and how to dose so it cannot overshoot.

Every measurement behind a plan has an uncertainty. This module samples the
plausible waters (a Latin hypercube over the inputs, through the same
vectorised inference and dose solve as one plan), and reports:

* :func:`dose_uncertainty` - the dose each plausible water needs (5th, 50th
  and 95th percentile), how often the planned dose lands outside the window,
  and which input makes most of the spread: a measurement, or the model's
  own constants (those of the water's metals, ligands and solids, each
  with its spread between compilations; :mod:`.model_spread`);
* :func:`staged_dose` - for a batch, a first dose that stays below the aim
  with a stated confidence, and a trim table: for each pH the operator may
  read after it, the extra product, from the water re-inferred from that
  reading and the dose already given (not by proportion).

Default uncertainties (one standard deviation) are common practice unless
said: a pH reading 0.05 (a meter calibrated that day; Standard Methods
4500-H+ B, from memory), a lab alkalinity or acidity 3 % and at least
2 mg/L (Standard Methods 2320 B and 2310 B single-laboratory precision is
of that order, from memory), listed solutes and metals 5 % (routine
laboratory analyses), temperature 1 °C, tank volume or flow 5 %, product
strength 2 % (a supplier's certificate range); the model's constants with
their spreads between compilations (``model_scale`` scales them, 0 leaves
them out). The scenario's ``[uncertainty]`` table overrides each.

Pure: numbers in, numbers out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from .findings import Finding, Q, note
from .measurements import ACIDITY_ENDPOINT_PH, ALKALINITY_ENDPOINT_PH, Measurements
from .measurements import check
from .model_spread import group_of, model_groups, present_ids, shift_of
from .variants import Perturbation, infer_many
from ..chem import Mixture, add_dose, dose_to_ph, solve_ph, strong_balance_at_ph
from ..errors import InputError
from .plan import has_grip

__all__ = ["Spread", "SPREAD_KEYS", "DoseUncertainty", "Staging", "TrimRow",
           "dose_uncertainty", "staged_dose", "follow_table", "spread_from", "MATERIAL_RISK",
           "metering_step",
           "INPUT_WORDS"]

#: A planned dose that leaves the window this often is staged (common practice).
MATERIAL_RISK = 0.05
#: pH tolerance of the sampled waters' forward solves [pH]: far finer than any
#: window edge or percentile the sample reports needs.
SAMPLE_TOL_PH = 1e-6

#: Plain name of each sampled input, and what would narrow its part most.
INPUT_WORDS = {
    "ph": ("pH reading", "a second pH reading with a freshly calibrated meter"),
    "lab": ("lab alkalinity or acidity", "a second lab result"),
    "solutes": ("listed solutes", "a fuller analysis of the listed solutes"),
    "metals": ("metals", "a second metals analysis"),
    "temperature": ("temperature", "measuring the temperature of the tank"),
    "amount": ("tank volume or flow", "a closer reading of the level or the flow meter"),
    "strength": ("product strength", "checking the product's strength (density or "
                 "certificate)"),
}


@dataclass(frozen=True)
class Spread:
    """One standard uncertainty of each input, and how to sample them."""

    ph: float = 0.05                 #: [pH units]
    lab_percent: float = 3.0         #: of the lab value, and at least LAB_FLOOR_MG_L
    solutes_percent: float = 5.0
    metals_percent: float = 5.0
    temperature_c: float = 1.0
    amount_percent: float = 5.0      #: tank volume or flow
    strength_percent: float = 2.0    #: product strength
    model_scale: float = 1.0         #: of the model constants' own spreads (0: none)
    samples: int = 2000
    confidence_percent: float = 95.0  #: of the staged first dose staying below the aim
    seed: int = 20261202


#: The smallest uncertainty of a lab alkalinity or acidity [mg/L as CaCO3].
LAB_FLOOR_MG_L = 2.0
#: Scenario keys of [uncertainty], with their allowed range.
SPREAD_KEYS = {"ph": (0.0, 2.0), "lab_percent": (0.0, 100.0), "solutes_percent": (0.0, 100.0),
               "metals_percent": (0.0, 100.0), "temperature_c": (0.0, 20.0),
               "amount_percent": (0.0, 50.0), "strength_percent": (0.0, 50.0),
               "model_scale": (0.0, 5.0),
               "samples": (100, 100_000), "confidence_percent": (50.0, 99.9),
               "seed": (0, 2**32 - 1)}


def spread_from(table: Mapping[str, Any] | None) -> Spread:
    """A :class:`Spread` from a scenario's ``[uncertainty]`` table (checked)."""
    values: dict[str, Any] = {}
    for key, value in (table or {}).items():
        if key not in SPREAD_KEYS:
            raise InputError(f"uncertainty.{key}", "unknown key; allowed: "
                             + ", ".join(SPREAD_KEYS))
        lo, hi = SPREAD_KEYS[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value) or not lo <= value <= hi:
            raise InputError(f"uncertainty.{key}", f"{value!r}; allowed: {lo:g} to {hi:g}")
        if key in ("samples", "seed") and value != int(value):
            raise InputError(f"uncertainty.{key}", f"{value!r}; allowed: a whole number")
        values[key] = int(value) if key in ("samples", "seed") else float(value)
    return Spread(**values)


@dataclass(frozen=True)
class DoseUncertainty:
    """What the plausible waters need, and how the planned dose fares in them."""

    samples: int                      #: waters sampled
    valid: int                        #: of which a real water can be
    needed_mol_l: np.ndarray = field(repr=False)   #: nominal product each needs [mol/L]
    ph_after_plan: np.ndarray = field(repr=False)  #: pH the planned dose gives in each
    p05_mol_l: float = 0.0
    p50_mol_l: float = 0.0
    p95_mol_l: float = 0.0
    p_below: float = 0.0              #: planned dose leaves the pH below the window [-]
    p_above: float = 0.0
    shares: tuple[tuple[str, float], ...] = ()   #: input and its share of the spread
    sample: Any = field(default=None, repr=False)  #: the sampled waters, for staging
    group_words: Mapping[str, str] = field(default_factory=dict)  #: model group -> its name

    @property
    def p_outside(self) -> float:
        """Probability the planned dose lands outside the window [-]."""
        return self.p_below + self.p_above

    def spread_finding(self) -> Finding:
        """Which input makes most of the spread, in plain words."""
        if not self.shares or self.shares[0][1] <= 0:
            return note("spread", "the inputs hardly move the dose", "info")
        key, share = self.shares[0]
        name, advice = input_words(key, self.group_words)
        rest = [(k, s) for k, s in self.shares[1:3] if s >= 0.01]
        q = {"share": Q(share, "%")} | {f"share_{_slot(k)}": Q(s, "%") for k, s in rest}
        then = ", ".join(f"{input_words(k, self.group_words)[0]} {{share_{_slot(k)}}}"
                         for k, _ in rest)
        return Finding("spread", "info", "most of the spread comes from the {input} ({share}): "
                       "{advice} would narrow it most" + (f"; then {then}" if then else ""), q,
                       {"input": name, "advice": advice})


def input_words(key: str, groups: Mapping[str, str]) -> tuple[str, str]:
    """(plain name, what would narrow it) of a sampled input or model group."""
    if key in INPUT_WORDS:
        return INPUT_WORDS[key]
    return (f"model's {groups.get(key, key)}",
            "a bench titration of this water (dosing titration), or a jar test for the "
            "metals,")


def _slot(key: str) -> str:
    """A template slot name for a key (``model:aluminium`` -> ``model_aluminium``)."""
    return key.replace(":", "_")


@dataclass(frozen=True)
class _Sample:
    """The sampled inputs, and the plausible waters behind them."""

    mix: Mixture
    ok: np.ndarray
    z: np.ndarray             # (n, k) standard normal scores of the sampled inputs
    keys: tuple[str, ...]     # input of each column of z
    amount: np.ndarray        # true volume or flow over the stated [-]
    strength: np.ndarray      # true product strength over the nominal [-]


def _sample(m: Measurements, spread: Spread, reagent_ids=()) -> _Sample:
    """Latin-hypercube sample of the measurements and of the model's constants
    the water leans on (:mod:`.model_spread`; its reagent's columns
    included), and the waters they imply."""
    keys = ["ph", "temperature", "amount", "strength"]
    lab = m.lab_value
    lab_key = lab[0] if lab else None
    if lab_key and _nothing_to_titrate(m):
        lab_key = None          # a 0 the method must give is exact, not a reading
    if lab_key:
        keys.append("lab")
    if m.solutes_mmol_l or m.solutes_mg_l:
        keys.append("solutes")
    if m.metals_mg_l:
        keys.append("metals")
    groups = _model_groups(m, reagent_ids) if spread.model_scale > 0 else ()
    groups = tuple(replace(g, sd=g.sd * spread.model_scale) for g in groups)
    keys += [g.key for g in groups]
    n = spread.samples
    z = np.clip(_normal_scores(_latin_hypercube(n, len(keys), spread.seed)), -4.0, 4.0)
    col = {k: z[:, i] for i, k in enumerate(keys)}
    zero = np.zeros(n)

    def rel(key, pct):
        return np.maximum(1.0 + pct / 100.0 * col.get(key, zero), 0.0)

    lab0 = float(lab[1]) if lab_key else 0.0
    lab_sd = max(spread.lab_percent / 100.0 * lab0, LAB_FLOOR_MG_L) if spread.lab_percent else 0.0
    variants = Perturbation(
        ph=np.clip(float(m.ph) + spread.ph * col["ph"], 0.0, 14.0),
        temperature_c=np.clip(float(m.temperature_c)
                              + spread.temperature_c * col["temperature"], 0.0, 60.0),
        lab_mg_l=np.maximum(lab0 + lab_sd * col.get("lab", zero), 0.0),
        solute_factor=rel("solutes", spread.solutes_percent),
        metal_factor=rel("metals", spread.metals_percent),
        shift=shift_of(groups, z[:, len(keys) - len(groups):]) if groups else None)
    mix, ok = infer_many(m, variants)
    return _Sample(mix, ok, z, tuple(keys),
                   np.maximum(rel("amount", spread.amount_percent), 0.05),
                   np.maximum(rel("strength", spread.strength_percent), 0.05))


def _model_groups(m: Measurements, reagent_ids) -> tuple:
    """The groups of constants the measured water and its reagent lean on."""
    job = check(m)
    extra = set(reagent_ids)
    if m.lab_value or m.open_to_air or "carbonate" in job.totals:
        extra.add("carbonate")
    return model_groups(present_ids(job.vec, extra))


def _latin_hypercube(n: int, d: int, seed: int) -> np.ndarray:
    """(n, d) points in [0, 1): each column takes each of n equal strata once
    (McKay, Beckman & Conover 1979), in a random order, jittered within."""
    rng = np.random.default_rng(seed)
    strata = np.argsort(rng.random((d, n)), axis=1).T
    return (strata + rng.random((n, d))) / n


def _normal_scores(u: np.ndarray) -> np.ndarray:
    """Standard normal quantiles of ``u`` (the inverse of the normal CDF).

    The standard library's NormalDist (Wichura's AS241 algorithm) keeps
    scipy.stats, slow to import, out of every plan.
    """
    from statistics import NormalDist
    inv = NormalDist().inv_cdf
    flat = np.clip(u.ravel(), 1e-12, 1.0 - 1e-12)
    return np.fromiter((inv(x) for x in flat), float, flat.size).reshape(u.shape)


def _nothing_to_titrate(m: Measurements) -> bool:
    """A lab value of 0 on a water at or past its titration end point."""
    key, value = m.lab_value
    if float(value) != 0.0:
        return False
    ph = float(m.ph)
    if key.startswith("alkalinity"):
        return ph <= float(m.alkalinity_endpoint_ph or ALKALINITY_ENDPOINT_PH)
    return ph >= float(m.acidity_endpoint_ph or ACIDITY_ENDPOINT_PH)


def dose_uncertainty(m: Measurements, plan, spread: Spread = Spread()
                     ) -> DoseUncertainty | None:
    """Sample the plausible waters behind ``plan`` and see how its dose fares.

    ``m`` are the measurements of the plan's water. The dose a sampled water needs is expressed as
    nominal product per stated litre (what the operator would have had to
    meter): the true need times the true volume over the stated, over the
    true strength. None when no sampled water is a real one.
    """
    s = _sample(m, spread, tuple(plan.reagent.compound.adds))
    r = plan.reagent.vector()
    aim, target = plan.target.ph_aim, plan.target
    need, grip = dose_to_ph(s.mix, r, aim)
    valid = s.ok & has_grip(plan.reagent, need, grip)
    if not valid.any():
        return None
    idx = np.flatnonzero(valid)
    need = np.maximum(need[idx], 0.0) * s.amount[idx] / s.strength[idx]
    given = plan.dose_mol_l * s.strength[idx] / s.amount[idx]
    sub = s.mix.take(idx)
    ph_after = solve_ph(add_dose(sub, r, given), ph_guess=np.full(idx.size, aim),
                        tol_ph=SAMPLE_TOL_PH)
    p05, p50, p95 = np.percentile(need, [5, 50, 95])
    return DoseUncertainty(
        samples=spread.samples, valid=int(idx.size), needed_mol_l=need,
        ph_after_plan=ph_after, p05_mol_l=float(p05), p50_mol_l=float(p50),
        p95_mol_l=float(p95), p_below=float(np.mean(ph_after < target.ph_min)),
        p_above=float(np.mean(ph_after > target.ph_max)),
        shares=_merged(_shares(s.z[idx], s.keys, need)), sample=s,
        group_words={group_of(g.key): g.words
                     for g in _model_groups(m, tuple(plan.reagent.compound.adds))})


def _shares(z: np.ndarray, keys: tuple[str, ...], y: np.ndarray) -> tuple:
    """Each input's share of the spread: squared standardised regression
    coefficients (the inputs are independent standard normal scores), largest
    first."""
    if y.size < len(keys) + 2 or np.std(y) == 0:
        return ()
    a = np.column_stack([np.ones(y.size), z])
    coef, *_ = np.linalg.lstsq(a, y, rcond=None)
    c2 = coef[1:] ** 2
    total = c2.sum()
    if total <= 0:
        return ()
    order = np.argsort(-c2)
    return tuple((keys[i], float(c2[i] / total)) for i in order)


def _merged(shares: tuple) -> tuple:
    """Shares with the keys of one model group added together (a metal's
    hydrolysis and its solid are one: its constants), largest first."""
    out: dict[str, float] = {}
    for key, share in shares:
        k = group_of(key) if key.startswith("model:") else key
        out[k] = out.get(k, 0.0) + share
    return tuple(sorted(out.items(), key=lambda kv: -kv[1]))


@dataclass(frozen=True)
class TrimRow:
    """One row of the trim table."""

    ph_read: float
    extra_mol_l: float | None        #: None: at or past the aim, add nothing
    below_metering: bool = False     #: what is needed is under half a metering step


@dataclass(frozen=True)
class Staging:
    """A first dose and the trim table that follows it."""

    confidence: float                #: first dose stays short of the aim this often [-]
    first_mol_l: float
    trim: tuple[TrimRow, ...]
    ph_first_range: tuple[float, float]   #: 5th to 95th percentile after the first dose
    p_inside: float = math.nan       #: plausible waters the table lands in the window [-]
    reading_sd: float = 0.0          #: pH reading error the landing rate includes [pH]
    metering: tuple[str, float] = ("litres", 0.0)   #: ("litres" or "kg", the step)


def staged_dose(plan, unc: DoseUncertainty, spread: Spread = Spread(),
                rows: int = 20) -> Staging | None:
    """A first dose short of the aim with ``spread.confidence_percent``, and the trim table.

    The first dose is the (100 - confidence) percentile of what the plausible
    waters need. The trim table covers the pH readings the first dose may
    give (1st to 99th percentile of the sampled waters), in steps of 0.1,
    0.2 or 0.5 pH (at most ``rows`` rows); each extra dose comes from the
    dosed water re-inferred from that reading: its weak-acid and metal
    totals as planned plus the first dose, its strong-ion balance found from
    the reading (hydroxides formed).
    """
    conf = spread.confidence_percent / 100.0
    first = float(np.percentile(unc.needed_mol_l, 100.0 * (1.0 - conf)))
    if first <= 0:
        return None
    s = unc.sample
    r = plan.reagent.vector()
    idx = np.flatnonzero(s.ok)
    given = first * s.strength[idx] / s.amount[idx]
    ph1 = solve_ph(add_dose(s.mix.take(idx), r, given),
                   ph_guess=np.full(idx.size, plan.target.ph_aim), tol_ph=SAMPLE_TOL_PH)
    lo, hi = np.percentile(ph1, [1, 99])
    grid = _grid(float(lo), float(hi), rows)
    extra = trim_doses(plan, first, grid)
    raising = plan.reagent.raises_ph
    # Each extra as it can be metered: rounded to the step, nothing below half of it.
    unit, step, step_mol = metering_step(plan)
    small = extra < step_mol / 2.0
    metered = np.where(small, 0.0, np.round(extra / step_mol) * step_mol)
    # A reading whose water cannot be re-inferred gets no row (never a guess).
    trim = tuple(TrimRow(float(p), None if (p >= plan.target.ph_aim if raising
                                           else p <= plan.target.ph_aim) else float(m),
                         bool(b))
                 for p, e, m, b in zip(grid, extra, metered, small)
                 if math.isfinite(e) or (p >= plan.target.ph_aim if raising
                                         else p <= plan.target.ph_aim))
    p5, p95 = np.percentile(ph1, [5, 95])
    staging = Staging(conf, first, trim, (float(p5), float(p95)), reading_sd=spread.ph,
                      metering=(unit, step))
    final = follow_table(plan, staging, s.mix.take(idx), s.strength[idx] / s.amount[idx],
                         ph_first=ph1)
    t = plan.target
    return replace(staging, p_inside=float(np.mean((final >= t.ph_min) & (final <= t.ph_max))))


def follow_table(plan, staging: Staging, waters: Mixture, delivered: np.ndarray,
                 ph_first: np.ndarray | None = None) -> np.ndarray:
    """The final pH of each water when an operator follows the staged dose.

    ``delivered`` is product reaching the water per product metered (true
    strength over nominal, stated volume over true). The operator reads the
    pH after the first dose, with the meter's error (``staging.reading_sd``,
    normal, a fixed seed so the figure is repeatable), and adds the extra
    the table gives for the reading (interpolated between rows; nothing at
    or past the aim). ``ph_first``: the true pH after the first dose, when
    already solved.
    """
    r = plan.reagent.vector()
    aim = plan.target.ph_aim
    first = staging.first_mol_l * delivered
    ph1 = (solve_ph(add_dose(waters, r, first), ph_guess=np.full(waters.n, aim),
                    tol_ph=SAMPLE_TOL_PH)
           if ph_first is None else ph_first)
    rows = [row for row in staging.trim if row.extra_mol_l is not None]
    if not rows:
        return ph1
    x = np.array([row.ph_read for row in rows])
    y = np.array([row.extra_mol_l for row in rows])
    order = np.argsort(x)
    read = ph1 + staging.reading_sd * np.random.default_rng(READING_SEED).standard_normal(
        ph1.size)
    extra = np.interp(read, x[order], y[order])
    past = (read >= aim) if plan.reagent.raises_ph else (read <= aim)
    extra = np.where(past, 0.0, extra)
    total = first + extra * delivered        # both per litre of the water before dosing
    return solve_ph(add_dose(waters, r, total), ph_guess=np.full(waters.n, aim),
                    tol_ph=SAMPLE_TOL_PH)


#: A batch dose is metered to this share of the planned dose, and never finer
#: than 0.1 L of a solution (a graduated jug, a day-tank gauge) or 0.1 kg of
#: a solid (a platform scale): common practice for a hand-dosed batch.
METER_SHARE = 0.01
METER_FLOOR = {"litres": 0.1, "kg": 0.1}


def metering_step(plan) -> tuple[str, float, float]:
    """("litres" or "kg", the step an extra dose is metered to in that unit
    (rounded up to 1, 2 or 5 times a power of ten), the step as mol/L of water)."""
    r, a = plan.reagent, plan.amounts()
    if a.litres_product is not None and r.litres_product_per_mol:
        unit, amount, per_mol = "litres", a.litres_product, r.litres_product_per_mol
    else:
        unit, amount, per_mol = "kg", a.kg_product or 0.0, r.kg_product_per_mol or 0.0
    raw = max(METER_FLOOR[unit], METER_SHARE * amount)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= raw * (1 - 1e-12))
    litres = plan.basis.litres
    return unit, step, (step / (per_mol * litres) if per_mol and litres else 0.0)


#: Seed of the pH-reading errors of the simulated trim (repeatable figures).
READING_SEED = 20261205


def _grid(lo: float, hi: float, rows: int) -> np.ndarray:
    """Readings from ``lo`` to ``hi`` on a round step (0.1, 0.2 or 0.5 pH)."""
    for step in (0.1, 0.2, 0.5, 1.0):
        start, stop = math.floor(lo / step) * step, math.ceil(hi / step) * step
        if (stop - start) / step + 1 <= rows:
            break
    return np.round(np.arange(start, stop + step / 2, step), 2)


def trim_doses(plan, first_mol_l: float, readings: np.ndarray) -> np.ndarray:
    """Extra dose to the aim for each pH read after ``first_mol_l`` [mol/L].

    The dosed water keeps the planned totals plus the first dose; the
    reading fixes its strong-ion balance (metals capped at their
    hydroxides, as they are in the tank by then).
    """
    w, r = plan.water, plan.reagent.vector()
    dosed = add_dose(w.mixture(), r, first_mol_l)
    n = readings.size
    tot = np.repeat(dosed.totals_mol_l, n, axis=0)
    co2 = np.repeat(dosed.co2_air_mol_l, n)
    s, _ = strong_balance_at_ph(tot, readings, w.temperature_c, activity=w.activity,
                                extra_ionic_strength=w.known_ionic_strength,
                                co2_air_mol_l=co2, unknown_pka=w.unknown_pka,
                                known_strong_eq_l=w.known_strong_eq_l, solids=True,
                                calcite=dosed.calcite)
    mix = Mixture.build(tot, np.where(np.isfinite(s), s, 0.0),
                        w.strong_ionic_strength_for(np.where(np.isfinite(s), s, 0.0)),
                        w.temperature_c, co2, w.activity, w.unknown_pka)
    mix = replace(mix, calcite=dosed.calcite)
    extra, _ = dose_to_ph(mix, r, plan.target.ph_aim)
    f = 1.0 + first_mol_l * r.volume_l           # per litre of the water as first dosed
    return np.where(np.isfinite(s) & np.isfinite(extra), np.maximum(extra, 0.0) * f, np.nan)
