"""Checks that follow from the chemistry of a dosed water: heat, gas,
what the dose adds to the discharge, and scale.

:func:`assess` is called by :func:`dosing.planning.plan.plan_dose` for every plan, so
every front end shows the same checks. Each check is a
:class:`~dosing.planning.findings.Finding`: its numbers (with units in the
key names), the words that go with them, and a level, ``info``, ``warning``
or ``danger``. Thresholds that are common practice,
not published limits, say so beside them.

Heat
----
The heat of the acid-base reactions comes from the change of speciation
itself (Hess's law): each dissociation step j,i that advances by ξ_ji
(moles of the forms beyond step i) contributes ΔH_ji ξ_ji, and water
ionisation, H2O = H+ + OH-, advances by ξ_w = Δ[OH-] - (OH- delivered):

    ΔH = Σ ΔH_ji ξ_ji + ΔH_w(T) ξ_w

with ΔH_w = +55.8 kJ/mol at 25 °C and ΔCp = -215 J/(K mol). The heat of
diluting a concentrated product is added from the reagent's integral heat
of dilution. The batch warms by q / (ρ c_p), c_p = 4.18 kJ/(kg K).

References
----------
1. Olofsson, G.; Hepler, L. G. (1975). J. Solution Chem. 4, 127
   (ΔH of ionisation of water 55.81 kJ/mol; from memory).
2. Singh, P. P.; Woolley, E. M.; McCurdy, K. G.; Hepler, L. G. (1976).
   Can. J. Chem. 54, 3315 (ΔCp = -215 J/(K mol)).
3. Sander, R. (2015). Compilation of Henry's law constants for water as
   solvent. Atmos. Chem. Phys. 15, 4399 (H2S, NH3, HCN; values from memory).
4. NIOSH Pocket Guide to Chemical Hazards: IDLH of H2S 100 ppm, HCN 50 ppm,
   NH3 300 ppm (from memory).
5. Plummer, L. N.; Busenberg, E. (1982), calcite solubility (dosing.chem.water).
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from .effluent import Water
from .findings import Finding, Q
from .measurements import BACKGROUND_IONS
from ..chem import CARBONATE, Speciation, co2_in_air_mol_l, system_index
from ..chem.metals import label
from .reagents import Reagent
from ..chem.species import MOLAR_MASS, SYSTEMS
from ..chem.water import R_J_MOL_K, calcite_pksp, density

__all__ = ["assess", "reaction_heat_kj_l", "DH_WATER_KJ_MOL", "gypsum_si", "calcite_si",
           "ION_PERMIT_KEYS", "GYPSUM_LOG_KSP"]

#: Enthalpy of water ionisation at 25 °C [kJ/mol] (Olofsson & Hepler 1975).
DH_WATER_KJ_MOL = 55.8
#: Heat capacity change of water ionisation [kJ/(K mol)] (Singh et al. 1976).
DCP_WATER_KJ_MOL_K = -0.215
#: Specific heat of water [kJ/(kg K)] (common practice, 4.18 near 25 °C).
CP_WATER = 4.18
#: Temperature rise worth a warning [K] (common practice).
HEAT_RISE_WARN_K = 5.0
#: Treated-water temperature many sewer permits cap [°C] (common practice).
DISCHARGE_TEMP_WARN_C = 40.0
#: Heat of dilution per kg of product above which local boiling at the
#: dosing point is possible [kJ/kg] (common practice: enough to take its
#: own mass of water from 20 to 100 °C).
LOCAL_BOIL_KJ_KG = 330.0
#: pH below which sulfide is mostly H2S (pKa near 7; common practice: 8).
H2S_PH = 8.0
#: pH above which ammonia strips and smells (pKa near 9.2; common practice).
NH3_PH = 9.0
#: Calcite saturation index above which scale is likely (common practice).
CALCITE_SI_WARN = 0.3
#: log10 Ksp of gypsum, CaSO4·2H2O = Ca2+ + SO4 2- + 2 H2O, at 25 °C
#: (-4.58; Langmuir 1997, Aqueous Environmental Geochemistry, from memory).
#: Its small enthalpy is neglected over 0-60 °C.
GYPSUM_LOG_KSP = -4.58
#: Excess CO2 over air equilibrium worth reporting as off-gas [mmol/L].
CO2_OFFGAS_NOTE_MMOL_L = 1.0
#: Excess CO2 at which fizzing and foam are expected [mmol/L] (common
#: practice: about 220 mg/L of CO2).
CO2_FOAM_MMOL_L = 5.0
#: Molar gas constant in L atm/(K mol), from R [J/(mol K)] and 1 atm = 101 325 Pa.
R_L_ATM = R_J_MOL_K / 101.325
#: Permit keys on ions and dissolved solids (metal caps are in dosing.planning.solids).
ION_PERMIT_KEYS = ("sodium_mg_l", "calcium_mg_l", "sulfate_mg_l", "chloride_mg_l",
                   "magnesium_mg_l", "tds_increase_mg_l")
#: Strong ions a dose can add, by formula, with the names used for the
#: background ions of an effluent (dosing.planning.effluent.BACKGROUND_IONS).
_ION_NAMES = {formula: name for name, formula in BACKGROUND_IONS.items()} | {"SO4": "sulfate"}

# Henry's constants at 25 °C [mol/(kg atm)] and d ln KH / d(1/T) [K]
# (Sander 2015; from memory), and NIOSH IDLH [ppm] (from memory).
_GASES = {"sulfide": ("H2S", 0.10, 2100.0, 100.0),
          "ammonia": ("NH3", 59.0, 4200.0, 300.0),
          "cyanide": ("HCN", 9.0, 5000.0, 50.0)}


def _henry(gas_system: str, temperature_c: float) -> float:
    _, kh25, slope, _ = _GASES[gas_system]
    T = temperature_c + 273.15
    return kh25 * math.exp(slope * (1.0 / T - 1.0 / 298.15))


def _stepwise(sp: Speciation) -> np.ndarray:
    """(n, m, 3): concentration of each system in forms beyond step i [mol/L]."""
    beyond = np.flip(np.cumsum(np.flip(sp.alpha, -1), -1), -1)[:, :, 1:]
    return sp.free[:, :, None] * beyond


def reaction_heat_kj_l(before: Speciation, after: Speciation, reagent: Reagent,
                       dose_mol_l: float, temperature_c: float) -> tuple[float, float]:
    """Heat released by the acid-base reactions of a dose [kJ per L of water].

    Returns
    -------
    (heat_kj_l, xi_water_mol_l) : tuple of float
        Heat released (positive: the water warms) and the extent of water
        formation, -ξ_w [mol/L].
    """
    grow = 1.0 + dose_mol_l * (reagent.litres_product_per_mol or 0.0)
    a_before = _stepwise(before)[0]
    a_after = _stepwise(after)[0] * grow
    entry = np.zeros_like(a_before)
    for key, n in reagent.compound.adds.items():
        j = system_index(key)
        k_in = reagent.compound.enters_as.get(key, 0)
        entry[j, :k_in] = n * dose_mol_l
    xi = a_after - a_before - entry
    dh = np.zeros_like(xi)
    for j, s in enumerate(SYSTEMS):
        dh[j, :s.steps] = s.enthalpy_kj_mol
    xi_w = (float(after.oh_mol_l[0]) * grow - float(before.oh_mol_l[0])
            - reagent.compound.oh_added * dose_mol_l)
    dh_w = DH_WATER_KJ_MOL + DCP_WATER_KJ_MOL_K * (temperature_c - 25.0)
    enthalpy = float((dh * xi).sum()) + dh_w * xi_w
    return -enthalpy, -xi_w


def assess(water: Water, reagent: Reagent, dose_mol_l: float, before: Speciation,
           after: Speciation, *, batch_litres: float,
           permit: Mapping[str, float] | None = None) -> tuple[Finding, ...]:
    """All checks for a dose; see the module notes.

    ``before`` and ``after`` are the speciation of the water before and after
    the dose; ``batch_litres`` is the water a batch (or an hour of flow)
    holds, for moles and litres of gas. ``permit`` caps on metals are
    checked by :mod:`dosing.planning.solids`, not here.
    """
    f = 1.0 / (1.0 + dose_mol_l * (reagent.litres_product_per_mol or 0.0))
    added = {ion: n * dose_mol_l * f * MOLAR_MASS[ion] * 1000.0
             for ion, n in reagent.compound.ions.items()}
    return (_heat_checks(water, reagent, dose_mol_l, before, after)
            + _sulfide_dose_checks(water, reagent, after)
            + _gas_checks(water, after, batch_litres)
            + _discharge_checks(water, reagent, dose_mol_l, f, added, after, permit)
            + _scale_checks(water, after))


def _heat_checks(water: Water, reagent: Reagent, d: float, before: Speciation,
                 after: Speciation) -> tuple[Finding, ...]:
    """Temperature rise of the batch, and local boiling of strong product."""
    t = water.temperature_c
    q_rx, water_formed = reaction_heat_kj_l(before, after, reagent, d, t)
    q_dil = 0.0 if reagent.dilution_heat_kj_mol is None else -reagent.dilution_heat_kj_mol * d
    rho = float(density(t)) / 1000.0
    rise = (q_rx + q_dil) / (rho * CP_WATER)
    # Resolution: 0.5 mK and 0.002 J/L (far below any thermometer); below it, 0.
    def kj(x):
        return Q(x, "kJ/L", zero_below=2e-6)
    q = {"reaction_heat_kj_per_l": kj(q_rx), "dilution_heat_kj_per_l": kj(q_dil),
         "temperature_rise_k": Q(rise, "K", digits=2, zero_below=5e-4),
         "temperature_after_c": Q(t + rise, "°C"),
         "water_formed_mmol_l": Q(water_formed * 1000, "mmol/L"),
         "heat_kj_per_l": kj(q_rx + q_dil),
         "discharge_limit_c": Q(DISCHARGE_TEMP_WARN_C, "°C")}
    msg = ("temperature rise of the water about {temperature_rise_k} ({heat_kj_per_l}:"
           " {reaction_heat_kj_per_l:num} from neutralisation, {dilution_heat_kj_per_l:num} "
           "from diluting the product)")
    if reagent.dilution_heat_kj_mol is None and reagent.form == "liquid":
        msg += "; the product's heat of dilution is not included (no value at hand)"
    level = "info"
    if rise > HEAT_RISE_WARN_K:
        level = "warning"
        msg += ("; the water ends near {temperature_after_c:.0f}: dose slowly, watch the tank "
                "temperature and the permit's temperature limit")
    elif t + rise > DISCHARGE_TEMP_WARN_C:
        msg += ("; the water is near {temperature_after_c:.0f} already: permits often cap the "
                "discharge temperature near {discharge_limit_c:g}")
    checks = [Finding("heat", level, msg, q)]
    if reagent.dilution_heat_kj_mol is not None and reagent.kg_product_per_mol:
        per_kg = -reagent.dilution_heat_kj_mol / reagent.kg_product_per_mol
        if per_kg > LOCAL_BOIL_KJ_KG:
            checks.append(Finding(
                "local-boiling", "danger",
                "{reagent} releases about {dilution_heat_kj_per_kg_product:.0fnum} kJ per kg "
                "on dilution: where it meets a little water (a dry dosing point, a splash, a "
                "wet drum) it can boil and spit. Dose below the surface into strong mixing; "
                "never add water to the product.",
                {"dilution_heat_kj_per_kg_product": Q(per_kg, "kJ/kg")},
                {"reagent": reagent.name}))
    return tuple(checks)


def _sulfide_dose_checks(water: Water, reagent: Reagent, after: Speciation
                         ) -> tuple[Finding, ...]:
    """A sulfide product dosed where it meets water below H2S's safe pH."""
    if "sulfide" not in reagent.compound.adds:
        return ()
    low = min(water.ph, float(after.ph[0]))
    if low >= H2S_PH:
        return ()
    return (Finding(
        "sulfide-dose", "danger",
        "{reagent} dosed into water at pH {ph_low:.2f}: where it enters, hydrogen sulfide "
        "forms at once (half the sulfide is H2S at pH 7, nine tenths at pH 6). Raise the pH "
        "above {h2s_ph:g} with caustic or lime first and dose the sulfide after it, in a "
        "closed, ventilated tank with H2S monitors",
        {"ph_low": Q(low, "pH"), "h2s_ph": Q(H2S_PH, "pH")}, {"reagent": reagent.name}),)


def _gas_checks(water: Water, after: Speciation, batch_litres: float) -> tuple[Finding, ...]:
    """CO2 off-gas, and toxic gases formed at the final pH."""
    checks = []
    t = water.temperature_c
    co2_star = float(after.concentration(CARBONATE, 0)[0])
    co2_air = float(co2_in_air_mol_l(t, water.pco2_atm))
    excess = co2_star - co2_air
    if excess * 1000 > CO2_OFFGAS_NOTE_MMOL_L and not water.open_to_air:
        mol = excess * batch_litres
        gas_l = mol * R_L_ATM * (t + 273.15)
        level = "warning" if excess * 1000 > CO2_FOAM_MMOL_L else "info"
        checks.append(Finding(
            "co2", level,
            "the dosed water holds {co2_excess_mmol_l} of CO2 above air "
            "equilibrium: up to {co2_gas_litres:,.0f} of CO2 gas can come off"
            + (" (strong fizzing and foam: dose slowly, leave headroom, ventilate)"
               if level == "warning" else " as it stands open"),
            {"co2_excess_mmol_l": Q(excess * 1000, "mmol/L"),
             "co2_gas_litres": Q(gas_l, "L gas"), "co2_mol": Q(mol, "mol")}))
    for sid in _GASES:
        check = _toxic_gas_check(sid, after, t)
        if check is not None:
            checks.append(check)
    return tuple(checks)


def _toxic_gas_check(sid: str, after: Speciation, t: float) -> Finding | None:
    """H2S, HCN or NH3 from the dosed water, or None when not a concern."""
    gas, _, _, idlh = _GASES[sid]
    ph_after = float(after.ph[0])
    j = system_index(sid)
    total = float(after.free[0, j])          # a complexed ligand does not escape
    if total <= 0.0:
        return None
    form = 1 if sid == "ammonia" else 0
    frac = float(after.alpha[0, j, form])
    if ((sid == "ammonia" and ph_after <= NH3_PH) or (sid == "sulfide" and ph_after >= H2S_PH)
            or (sid == "cyanide" and frac < 0.1)):
        return None
    conc = total * frac
    ppm = conc / _henry(sid, t) * 1e6
    mg = conc * MOLAR_MASS[gas] * 1000
    level = "danger" if (sid != "ammonia" or ppm > idlh) else "warning"
    what = {"sulfide": "toxic hydrogen sulfide", "cyanide": "deadly hydrogen cyanide",
            "ammonia": "ammonia (odour, irritant)"}[sid]
    return Finding(
        sid, level,
        "at pH {ph:.2f} {fraction_as_gas_former:.0%} of the {solute} is {gas} ({mg_per_l}): "
        "{what} gas; air in contact with the water could reach about "
        "{headspace_ppm:,.0fnum} ppm (IDLH {idlh_ppm:gnum} ppm). "
        + ("Do not acidify this waste in the open: closed tank, gas detection, "
           "scrubbed vent, or oxidise first." if sid != "ammonia" else
           "Keep covered and ventilated, or strip under control."),
        {"fraction_as_gas_former": Q(frac, "%"), "mg_per_l": Q(mg, "mg/L"),
         "headspace_ppm": Q(ppm, "ppm"), "ph": Q(ph_after, "pH"), "idlh_ppm": Q(idlh, "ppm")},
        {"solute": sid, "gas": gas, "what": what})


def _discharge_checks(water: Water, reagent: Reagent, d: float, f: float,
                      added: Mapping[str, float], after: Speciation,
                      permit) -> tuple[Finding, ...]:
    """Ions and dissolved solids the dose adds, and the permit's ion caps."""
    names = _ION_NAMES
    tds = sum(added.values())
    if "carbonate" in reagent.compound.adds and reagent.raises_ph:
        # Carbonate from soda ash or bicarbonate stays as HCO3-/CO3 2- except
        # the share that is CO2 at the final pH; counted as HCO3- (61 g/mol).
        kept = 1.0 - float(after.alpha[0, CARBONATE, 0])
        tds += d * f * kept * (MOLAR_MASS["CO2"] + MOLAR_MASS["H2O"] - 1.008) * 1000.0
    q = {f"{names[k]}_added_mg_l": Q(v, "mg/L") for k, v in added.items()}
    q["tds_increase_mg_l"] = Q(tds, "mg/L")
    parts = [f"{names[k]} +{{{names[k]}_added_mg_l}}" for k in added]
    checks = [Finding("discharge", "info",
                      "the dose adds " + (", ".join(parts) if parts else "no strong ions")
                      + "; dissolved solids rise by about {tds_increase_mg_l}", q)]
    after_mg = _after_mg_l(water, added, after, f)
    for key, cap in (permit or {}).items():
        if key not in ION_PERMIT_KEYS:
            continue
        if key == "tds_increase_mg_l":
            value, basis = tds, "increase from the dose"
        else:
            ion = key.removesuffix("_mg_l")
            value, basis = after_mg.get(ion, (None, ""))
            if value is None:
                value, basis = 0.0, "added by the dose; background not given"
        level = "danger" if value > cap else "info"
        checks.append(Finding(
            f"permit-{key}", level,
            "permit cap {what} {cap_mg_l:g}: {value_mg_l} ({basis})"
            + (" - EXCEEDS THE CAP" if value > cap else " - within the cap"),
            {"value_mg_l": Q(value, "mg/L"), "cap_mg_l": Q(cap, "mg/L")},
            {"what": label(key.removesuffix("_mg_l")), "basis": basis}))
    return tuple(checks)


def _scale_checks(water: Water, after: Speciation) -> tuple[Finding, ...]:
    """Calcite and gypsum saturation of the dosed water."""
    checks = []
    t = water.temperature_c
    ca_free = _free_calcium_mol_l(after)
    ca_mg = ca_free * MOLAR_MASS["Ca"] * 1000.0
    if ca_free > 0 and float(after.totals_mol_l[0, CARBONATE]) > 0:
        si = float(calcite_si(after, t)[0])
        formed = float(after.calcite_mol_l[0]) > 0
        level = "warning" if si > CALCITE_SI_WARN else "info"
        checks.append(Finding(
            "calcite", level,
            "calcite saturation index after dosing {calcite_si:+.2f}"
            + (": calcite precipitates to saturation (in the solids below); the water "
               "leaves saturated and can still scale pipes and probes" if formed
               else ": the treated water will deposit CaCO3 scale in pipes, probes and "
               "pumps; consider a lower aim or an acid rinse schedule" if level == "warning"
               else (": at or under saturation, no calcite scale expected" if si <= 0
                     else ": slightly over saturation")),
            {"calcite_si": Q(si), "calcium_mg_l": Q(ca_mg, "mg/L")}))
    so4_total = float(after.totals_mol_l[0, system_index("sulfate")])
    if ca_free > 0 and so4_total > 0:
        si = gypsum_si(after)
        formed = _phase_mol_l(after, "gypsum")
        level = "warning" if si > 0 or formed > 0 else "info"
        checks.append(Finding(
            "gypsum", level,
            "gypsum saturation index after dosing {gypsum_si:+.2f}"
            + (": gypsum precipitates to saturation ({gypsum_mmol_l} in the solids below); "
               "the water leaves saturated and deposits calcium sulfate in the tank and lines"
               if formed > 0 else
               ": calcium sulfate will crystallise as scale and sludge (lime on sulfate "
               "water); expect deposits in the tank and lines" if level == "warning"
               else ": under saturation, no gypsum scale expected"),
            {"gypsum_si": Q(si), "gypsum_mmol_l": Q(formed * 1000, "mmol/L")}))
    return tuple(checks)


def _phase_mol_l(sp: Speciation, phase_id: str) -> float:
    """Amount of one solid of the coupled equilibrium in the first water [mol/L]."""
    if phase_id not in sp.phase_ids:
        return 0.0
    return float(sp.phase_mol_l[0, sp.phase_ids.index(phase_id)])


def _free_calcium_mol_l(sp: Speciation) -> float:
    """Free Ca2+ of the first water of ``sp`` [mol/L]."""
    j = system_index("calcium")
    return float(sp.free[0, j] * sp.alpha[0, j, 0])


def gypsum_si(sp: Speciation) -> float:
    """Gypsum saturation index log10(a_Ca a_SO4 / Ksp) of the first water [-],
    with the activities of the speciation itself."""
    ca = _free_calcium_mol_l(sp)
    j = system_index("sulfate")
    so4 = sp.concentration(j, 1)[0]
    if ca <= 0 or so4 <= 0:
        return -math.inf
    lg = sp.log_gamma[0, system_index("calcium"), 0] + sp.log_gamma[0, j, 1]
    return math.log10(ca * float(so4)) + float(lg) - GYPSUM_LOG_KSP


def _after_mg_l(water: Water, added: Mapping[str, float], after: Speciation,
                f: float) -> dict[str, tuple[float, str]]:
    """Concentration after dosing of each ion a permit may cap [mg/L]."""
    out: dict[str, tuple[float, str]] = {}
    for ion, mg in added.items():
        if ion not in ("SO4", "Ca", "Mg"):   # weak-acid or metal totals, counted below
            out[_ION_NAMES[ion]] = (mg, "added by the dose; background not given")
    for name, mg in water.ions_mg_l.items():
        prev = out.get(name, (0.0, ""))[0]
        out[name] = (prev + mg * f, "background plus dose")
    for name, formula in (("calcium", "Ca"), ("magnesium", "Mg")):
        mol = float(after.totals_mol_l[0, system_index(name)])
        if mol > 0 or formula in added:
            out[name] = (mol * MOLAR_MASS[formula] * 1000, "dissolved after the dose")
    s = float(after.totals_mol_l[0, system_index("sulfate")]) * MOLAR_MASS["SO4"] * 1000
    if s > 0 or "SO4" in added:
        out["sulfate"] = (s, "water plus dose")
    return out


def calcite_si(sp: Speciation, temperature_c) -> np.ndarray:
    """Calcite saturation index of every water of ``sp`` [-] (-inf without Ca or CO3).

    log10({Ca2+}{CO3 2-}) + pKsp, Ksp of Plummer & Busenberg (1982), with
    the activities of the speciation itself.
    """
    t = np.broadcast_to(np.asarray(temperature_c, dtype=float), sp.ph.shape)
    j = system_index("calcium")
    ca = sp.free[:, j] * sp.alpha[:, j, 0]
    co3 = sp.concentration(CARBONATE, 2)
    lg = sp.log_gamma[:, j, 0] + sp.log_gamma[:, CARBONATE, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.log10(ca * co3) + lg + calcite_pksp(t)
    return np.where((ca > 0) & (co3 > 0), out, -np.inf)
