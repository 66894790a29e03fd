"""What the dosed water's speciation says of its metals: ligands that hold them, and what the model leaves out.

:func:`speciation_findings` reads the equilibrium of the dosed water (the
same one the dose and the metals left come from) and says:

* which ligand holds a metal in solution, where it holds most of what is
  left (``ligand-<metal>``): a warning, with what plants do about it, when
  the metal then breaks its cap, else a note;
* what the model leaves out that matters for this water (``limit-...``):
  carbonate solids that form slowly, chelants held intact, iron cyanides
  that never come apart, and co-precipitation onto iron and aluminium
  hydroxide floc (which the model does not count, so its metal figures are
  on the safe side).

The advice is common practice in metal-finishing and mine-water treatment,
worded for the operator; the permit and a licensed engineer decide.
"""

from __future__ import annotations

from typing import Mapping

from ..chem.complexes import COMPLEXES
from ..chem.metals import METAL_IDS, label
from ..chem.species import CHELANTS
from ..chem import Speciation, system_index
from .findings import Finding, Q, note

__all__ = ["speciation_findings", "held_by_ligand", "LIGAND_SHARE", "ADVICE"]

#: A ligand holding more than this share of a metal's dissolved total is named [-].
LIGAND_SHARE = 0.5
_BY_ID = {c.id: c for c in COMPLEXES}
_METALS = set(METAL_IDS)

#: What plants do about each ligand (common practice).
ADVICE: Mapping[str, str] = {
    "ammonia": "remove the ammonia first (air stripping at high pH, or breakpoint "
               "chlorination) or precipitate the metal as sulfide",
    "cyanide": "destroy the cyanide first (alkaline chlorination or peroxide, by a "
               "licensed procedure); iron cyanides do not come apart even then",
    "chelant": "segregate the chelated stream and break the chelate (oxidation, or "
               "displacement with ferrous iron or calcium at high pH), or precipitate "
               "the metal as sulfide",
    "fluoride": "precipitate the fluoride with lime first, or raise the aluminium "
                "dose",
    "ion pair": "raise the pH further or precipitate as sulfide; the pairs form "
                "wherever this much of the ligand is",
}
_SLOW = {"siderite": "iron(II)", "rhodochrosite": "manganese", "smithsonite": "zinc",
         "cerussite": "lead", "malachite": "copper"}


def held_by_ligand(sp: Speciation) -> dict[str, dict[str, float]]:
    """Metal id -> ligand id -> dissolved metal it holds in the first water [mol/L]."""
    out: dict[str, dict[str, float]] = {}
    if sp.complex_mol_l is None:
        return out
    for cid, c in zip(sp.complex_ids, sp.complex_mol_l[0]):
        parts = dict(_BY_ID[cid].parts)
        metals = [p for p in parts if p in _METALS]
        ligands = [p for p in parts if p not in _METALS]
        if len(metals) != 1 or len(ligands) != 1 or c <= 0.0:
            continue
        held = out.setdefault(metals[0], {})
        held[ligands[0]] = held.get(ligands[0], 0.0) + parts[metals[0]] * float(c)
    return out


#: Ligands that chelate (citrate is also a weak acid of the catalogue).
_CHELATING = frozenset(CHELANTS) | {"citrate"}


def _kind(ligand: str) -> str:
    if ligand in _CHELATING:
        return "chelant"
    return ligand if ligand in ADVICE else "ion pair"


def speciation_findings(sp: Speciation, metals_after_mg_l: Mapping[str, float],
                        caps: Mapping[str, float]) -> tuple[Finding, ...]:
    """The ligand and model-limit findings of a dosed water (see the module notes)."""
    out: list[Finding] = []
    ph = float(sp.ph[0])
    for metal, held in held_by_ligand(sp).items():
        dissolved = float(sp.totals_mol_l[0, system_index(metal)])
        ligand, mol = max(held.items(), key=lambda kv: kv[1])
        if dissolved <= 0.0 or mol / dissolved <= LIGAND_SHARE:
            continue
        out.append(_ligand_finding(metal, ligand, mol / dissolved, ph,
                                   metals_after_mg_l.get(metal, 0.0), caps.get(metal)))
    return tuple(out) + _limits(sp)


def _ligand_finding(metal: str, ligand: str, share: float, ph: float, left_mg_l: float,
                    cap: float | None) -> Finding:
    """One metal held in solution by one ligand."""
    kind = _kind(ligand)
    what = "ion pairs" if kind == "ion pair" else "complexes"
    q = {"share": Q(share, "%"), "left_mg_l": Q(left_mg_l, "mg/L"), "ph": Q(ph, "pH")}
    names = {"metal": label(metal), "ligand": ligand.replace("edta", "EDTA"),
             "what": what, "advice": ADVICE[kind]}
    head = ("{metal} stays dissolved as its {ligand} {what}: {share} of the {left_mg_l} "
            "left at pH {ph:.2f}")
    if cap is not None and left_mg_l > cap:
        q["cap_mg_l"] = Q(cap, "mg/L")
        return Finding(f"ligand-{metal}", "warning", head + ": hydroxide precipitation "
                       "cannot meet the cap of {cap_mg_l:g}; {advice}", q, names)
    return Finding(f"ligand-{metal}", "info", head + " (more than the hydroxide alone "
                   "would leave)", q, names)


def _limits(sp: Speciation) -> tuple[Finding, ...]:
    """What the model leaves out that matters for this water."""
    out: list[Finding] = []
    formed = {} if sp.phase_mol_l is None else {
        pid: float(x) for pid, x in zip(sp.phase_ids, sp.phase_mol_l[0]) if x > 1e-9}
    for solid, metal in _SLOW.items():
        if solid in formed:
            out.append(note(f"limit-{solid}", "{solid} is planned as formed, but it forms "
                            "slowly (hours to days at low supersaturation): until it has, "
                            "more {metal} stays dissolved and the pH reads a little off the "
                            "plan; measure again after it has settled", "info",
                            {"solid": solid, "metal": metal}))
    chelants = [c for c in sorted(_CHELATING) if sp.totals_mol_l[0, system_index(c)] > 0]
    if chelants:
        out.append(note("limit-chelant", "the model holds {chelants} intact: in a "
                        "neutralisation tank chelants neither break down nor let go of "
                        "their metals within hours", "info",
                        {"chelants": ", ".join(c.replace("edta", "EDTA") for c in chelants)}))
    if "Fe(CN)6-4" in sp.complex_ids or "Fe(CN)6-3" in sp.complex_ids:
        out.append(note("limit-iron-cyanide", "iron cyanides (ferro- and ferricyanide) are "
                        "inert: they pass any pH step intact and a weak-acid-dissociable "
                        "cyanide test does not count them, yet they can release cyanide in "
                        "sunlight", "info"))
    floc = {"iron_iii_hydroxide", "aluminium_hydroxide"} & set(formed)
    others = [p for p in formed if p.endswith("_hydroxide") and p not in floc
              and p != "calcium_hydroxide"]
    if floc and (others or sp.complex_ids):
        out.append(note("limit-coprecipitation", "metals also co-precipitate with and "
                        "adsorb onto the iron and aluminium hydroxide floc, which the model "
                        "does not count: the metals left are likely below these figures "
                        "(the figures are on the safe side); solids are taken as fresh "
                        "precipitates, more soluble than aged ones", "info"))
    return tuple(out)
