"""A treatment train: blend, oxidise, dose, separate, each planned on the water the step before leaves.

A train is an ordered tuple of :class:`StepSpec` (what a scenario asks for).
:func:`.train_run.run_train` takes the water entering the first step and
runs the steps in order: each takes a :class:`~dosing.planning.effluent.Water`
and returns a :class:`StepResult` holding the water it leaves (the step
functions are here, the blend's in :mod:`.blend`); the discharge checks
(:mod:`.discharge`) read the water leaving the last one.

The steps, and what they conserve:

* **blend** (:mod:`.blend`): streams mixed by volume (or flow); component
  totals, the strong-ion balance and the strong ions' ionic strength are
  conserved, and the pH of the blend is solved, not averaged.
* **oxidise**: iron(II) to iron(III) by air (4 Fe2+ + O2 + 10 H2O -> 4
  Fe(OH)3 + 8 H+) or by hydrogen peroxide (2 Fe2+ + H2O2 + 4 H2O -> 2
  Fe(OH)3 + 4 H+, 0.5 mol H2O2 per mol Fe); in both the strong-ion balance
  is unchanged and the charge balance releases the acid (2 H+ per Fe once
  the ferric iron has precipitated).
* **dose**: today's plan (:func:`~dosing.planning.plan.plan_dose`) of a
  reagent to a pH aim, with its window band and checks.
* **separate**: a clarifier or filter removes a fraction of every solid
  present (0.98 by default); a neutral solid leaves the pH as it was, and
  the solids it lets through stay in the totals, so a later step that
  lowers the pH redissolves them.

Pure: numbers in, results out.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np

from ..chem import N_ACIDS, Mixture, add_dose, solve_ph, speciate, system_index
from ..chem.columns import COLUMN_IDS
from ..chem.metals import METAL_IDS
from ..chem.species import MOLAR_MASS
from ..errors import ModelError
from .basis import Amounts, Batch, Flow, Target, amounts_for
from .effluent import Water, aerate
from .findings import Finding, note
from .plan import Plan, plan_dose
from .reagents import Reagent
from .solids import Solid, Sludge, metals_after_mg_l, sludge_of, solids_after

__all__ = ["StepSpec", "StepResult", "water_of", "STEP_KINDS", "DEFAULT_REMOVAL",
           "H2O2_PER_FE", "solids_of", "dose_step", "oxidise_step", "separate_step"]

STEP_KINDS = ("blend", "oxidise", "dose", "separate")
#: Fraction of the suspended solids a clarifier or filter removes by default
#: (common practice for a settled or filtered hydroxide sludge).
DEFAULT_REMOVAL = 0.98
#: Hydrogen peroxide per mole of iron(II) oxidised [mol/mol] (2 Fe2+ + H2O2).
H2O2_PER_FE = 0.5


@dataclass(frozen=True)
class StepSpec:
    """One step of a train, as the scenario asks for it.

    Attributes
    ----------
    kind : {"blend", "oxidise", "dose", "separate"}
    label : str
        Plain words for the sheet ("precipitate", "re-adjust", "clarifier").
    streams : tuple
        For a blend: (name, Water, amount) of each stream; amount in m³ for a
        batch, m³/h for a flow.
    by : {"air", "peroxide"}
        How an oxidise step oxidises.
    fraction : float
        Share of the iron(II) an oxidise step oxidises [-].
    reagent : Reagent or None
        The product of a dose step, or the peroxide of an oxidise step.
    target : Target or None
        The window and aim of a dose step.
    price_per_kg : float or None
        Product price, as given.
    removal : float
        Share of the solids a separate step removes [-].
    proposed : bool
        The planner proposed the step (the scenario did not ask for it).
    """

    kind: str
    label: str = ""
    streams: tuple = ()
    by: str = "air"
    fraction: float = 1.0
    reagent: Reagent | None = None
    target: Target | None = None
    price_per_kg: float | None = None
    removal: float = DEFAULT_REMOVAL
    proposed: bool = False
    per_hour: bool = False        #: a blend of flows (m³/h), not of volumes

    @property
    def amount_total(self) -> float:
        """A blend's streams together [m³ or m³/h]."""
        return sum(a for _, _, a in self.streams)


@dataclass(frozen=True)
class StepResult:
    """What one step did, and the water it leaves."""

    spec: StepSpec
    water_in: Water
    water_out: Water
    plan: Plan | None = None                  #: a dose step's plan
    solids: tuple[Solid, ...] = ()            #: solids in the water it leaves [per L]
    removed: tuple[Solid, ...] = ()           #: what a separate step took out [per L]
    sludge: Sludge | None = None              #: a separate step's sludge, per batch or hour
    metals_mg_l: Mapping[str, float] = field(default_factory=dict)  #: dissolved, after
    product: Amounts | None = None            #: peroxide of an oxidise step
    findings: tuple[Finding, ...] = ()
    blend: object | None = None               #: a blend step's streams (:class:`.blend.Blend`)

    @property
    def ph_in(self) -> float:
        return self.water_in.ph

    @property
    def ph_out(self) -> float:
        return self.water_out.ph


def water_of(mix: Mixture, template: Water, *, ph_guess: float | None = None,
             ions_mg_l: Mapping[str, float] | None = None) -> Water:
    """The :class:`Water` a one-row mixture is: its pH solved, its totals,
    balance and ionic strength as they are; the rest (temperature, model,
    air) from ``template``."""
    ph = float(solve_ph(mix, ph_guess=None if ph_guess is None else np.array([ph_guess]))[0])
    sp = speciate(mix, np.array([ph]))
    tot = mix.totals_mol_l[0]
    return replace(
        template, ph=ph, temperature_c=float(mix.temperature_c[0]),
        totals_mol_l={COLUMN_IDS[j]: float(tot[j]) for j in range(N_ACIDS)
                      if tot[j] > 0 or COLUMN_IDS[j] == "carbonate"},
        metals_mol_l={m: float(tot[system_index(m)]) for m in METAL_IDS
                      if tot[system_index(m)] > 0},
        strong_eq_l=float(mix.strong_eq_l[0]),
        strong_ionic_strength=float(mix.strong_ionic_strength[0]),
        ionic_strength=float(sp.ionic_strength[0]), ferrous_oxidised=False,
        known_strong_eq_l=float(mix.strong_eq_l[0]),
        known_ionic_strength=float(mix.strong_ionic_strength[0]),
        notes=(), ions_mg_l=dict(template.ions_mg_l if ions_mg_l is None else ions_mg_l),
        open_to_air=False)


def solids_of(water: Water) -> tuple[Solid, ...]:
    """The solids present in a water at its pH [per L of water]."""
    sp = speciate(water.mixture(air_equilibrium=False), np.array([water.ph]))
    return solids_after(sp, water.temperature_c, water.activity)


def _dissolved(water: Water) -> dict[str, float]:
    sp = speciate(water.mixture(air_equilibrium=False), np.array([water.ph]))
    return metals_after_mg_l(sp)


def dose_step(spec: StepSpec, water: Water, basis: Batch | Flow) -> StepResult:
    """A dose step: the plan, and the water it leaves."""
    plan = plan_dose(water, spec.reagent, spec.target, basis)
    # The plan's own water: its calcite and air cases are the ones the dose
    # was planned with, and the water leaving holds them.
    mix = add_dose(plan.water.mixture(), spec.reagent.vector(), plan.dose_mol_l)
    out = water_of(mix, plan.water, ph_guess=plan.ph_end,
                   ions_mg_l=_ions_after(water, spec.reagent, plan.dose_mol_l))
    if abs(out.ph - plan.ph_end) > 1e-6:
        raise ModelError(f"the water leaving the dose is at pH {out.ph:.6f}, not the "
                         f"{plan.ph_end:.6f} planned; the model is not trustworthy here")
    return StepResult(spec, water, out, plan=plan, solids=plan.solids,
                      metals_mg_l=dict(plan.metals_after_mg_l))


def _ions_after(water: Water, reagent: Reagent, dose_mol_l: float) -> dict[str, float]:
    """Background strong ions after a dose [mg/L]: diluted, plus what it adds."""
    f = 1.0 / (1.0 + dose_mol_l * (reagent.litres_product_per_mol or 0.0))
    names = {"Na": "sodium", "K": "potassium", "Cl": "chloride", "NO3": "nitrate"}
    out = {k: v * f for k, v in water.ions_mg_l.items()}
    for ion, n in reagent.compound.ions.items():
        if ion in names:
            out[names[ion]] = out.get(names[ion], 0.0) + n * dose_mol_l * f * MOLAR_MASS[ion] * 1e3
    return out


def oxidise_step(spec: StepSpec, water: Water, basis: Batch | Flow) -> StepResult:
    """Iron(II) to iron(III), by air or peroxide: the pH falls as the acid is released."""
    fe2 = water.metals_mol_l.get("iron_ii", 0.0)
    notes: list[Finding] = []
    if fe2 <= 0.0:
        notes.append(note("oxidise-nothing", "there is no iron(II) in this water: the "
                          "oxidise step changes nothing", "info"))
    vec = water.mixture(air_equilibrium=False)
    moved = aerate(vec.totals_mol_l)
    tot = vec.totals_mol_l + spec.fraction * (moved - vec.totals_mol_l)
    out = water_of(replace(vec, totals_mol_l=tot), water)
    product = None
    if spec.by == "peroxide" and fe2 > 0.0:
        product = amounts_for(H2O2_PER_FE * fe2 * spec.fraction, spec.reagent, basis)
    return StepResult(spec, water, out, solids=solids_of(out), metals_mg_l=_dissolved(out),
                      product=product, findings=tuple(notes))


def separate_step(spec: StepSpec, water: Water, basis: Batch | Flow,
              sludge_table: tuple[float, float]) -> StepResult:
    """Remove a share of every solid present; dissolved metals stay."""
    mix = water.mixture(air_equilibrium=False)
    sp = speciate(mix, np.array([water.ph]))
    solids = solids_after(sp, water.temperature_c, water.activity)
    if not solids:
        return StepResult(spec, water, water, metals_mg_l=_dissolved(water), findings=(
            note("separate-nothing", "no solid has formed by this step: the separation "
                 "removes nothing here", "info"),))
    gone = spec.removal * (sp.solids_mol_l[0] + _calcite_columns(sp))
    out = water_of(replace(mix, totals_mol_l=mix.totals_mol_l - gone[None, :]), water,
                   ph_guess=water.ph)
    removed = tuple(replace(s, mmol_per_l=s.mmol_per_l * spec.removal,
                            mg_per_l=s.mg_per_l * spec.removal) for s in solids)
    return StepResult(spec, water, out, solids=solids_of(out), removed=removed,
                      sludge=sludge_of(removed, basis.litres, solids_fraction=sludge_table[0],
                                       cake_density_kg_l=sludge_table[1]),
                      metals_mg_l=_dissolved(out))


def _calcite_columns(sp) -> np.ndarray:
    """Calcite of the direct path, as calcium and carbonate taken out [mol/L]."""
    out = np.zeros(sp.solids_mol_l.shape[1])
    if not sp.phase_ids:
        out[system_index("calcium")] += sp.calcite_mol_l[0]
        out[system_index("carbonate")] += sp.calcite_mol_l[0]
    return out
