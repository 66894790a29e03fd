"""Complexes and ion pairs: species formed from more than one component.

A component is a column of the engine (a weak-acid system or a metal). Its
*reference form* is the free metal ion for a metal, and the fully
deprotonated form for a weak acid (NH3, CO3 2-, SO4 2-, Y4- of EDTA, HS- of
sulfide in this model). A :class:`Complex` is formed from reference forms
and protons,

    sum_j n_j X_j + h H+  =  species          log K = log a_species - sum n_j log a_j - h log a_H

so CaHCO3+ is Ca2+ + CO3 2- + H+ (n = 1, 1; h = 1) and Cu(NH3)4 2+ is
Cu2+ + 4 NH3. The species that need one component only (the protonation
series of an acid, the hydrolysis of a metal) stay in :mod:`.species` and
:mod:`.metals`; the speciation core (:mod:`.coupled`) adds these on top.

Constants are cumulative, at 25 °C and I = 0 unless a row says otherwise,
moved with temperature by van 't Hoff where an enthalpy is given. Each
carries a spread: how far published compilations differ (log units), for
the uncertainty of the model itself.

Sources
-------
[N90]   Nordstrom, D. K. et al. (1990). Revised chemical equilibrium data for
        major water-mineral reactions and their limitations. ACS Symposium
        Series 416, 398-413 (ion pairs and enthalpies; from memory).
[PB82]  Plummer, L. N.; Busenberg, E. (1982). Geochim. Cosmochim. Acta 46,
        1011-1040 (CaHCO3+, CaCO3°; from memory).
[SM]    Smith, R. M.; Martell, A. E. Critical Stability Constants, Plenum,
        1974-1989, and NIST SRD 46 (ammine, cyanide, chelate constants; from
        memory; many at I = 0.1, used as I = 0: a bias of up to about a log
        unit for the chelates, inside their spread).
[P07]   Powell, K. J. et al. (2007). Pure Appl. Chem. 79, 895-950 (Cu2+
        carbonate and sulfate; from memory).
[P13]   Powell, K. J. et al. (2013). Pure Appl. Chem. 85, 2249-2311 (Zn2+
        carbonate and sulfate; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Complex", "COMPLEXES", "LIGAND_SETS"]


@dataclass(frozen=True)
class Complex:
    """One species formed from several components.

    Attributes
    ----------
    id : str
        Formula as written on the sheet (``Cu(NH3)4+2``).
    parts : tuple of (str, int)
        Component ids (columns) and how many of each reference form [-].
    h : int
        Protons in the formation reaction [-].
    log_k25 : float
        log10 K of the formation at 25 °C, I = 0 [-].
    enthalpy_kj_mol : float or None
        Enthalpy of the formation [kJ/mol]; None: not moved with temperature.
    spread : float
        How far compilations differ [log units].
    source : str
        Where the numbers come from.
    """

    id: str
    parts: tuple[tuple[str, int], ...]
    h: int
    log_k25: float
    enthalpy_kj_mol: float | None
    spread: float
    source: str


def _series(metal: str, ligand: str, sym: str, lig: str, log_betas, source: str, *,
            spread: float, dh_per_ligand: float | None = None) -> tuple[Complex, ...]:
    """The complexes M L_1 ... M L_n from cumulative constants log beta_1..n."""
    return tuple(Complex(f"{sym}({lig}){j}" if j > 1 else f"{sym}{lig}",
                         ((metal, 1), (ligand, j)), 0, b,
                         None if dh_per_ligand is None else dh_per_ligand * j, spread, source)
                 for j, b in enumerate(log_betas, start=1) if b is not None)


def _pair(metal: str, ligand: str, name: str, log_k: float, dh: float | None, spread: float,
          source: str, *, n: int = 1, h: int = 0) -> Complex:
    return Complex(name, ((metal, 1), (ligand, n)), h, log_k, dh, spread, source)


_AMMINES = (
    _series("copper", "ammonia", "Cu", "NH3", (4.13, 7.61, 10.48, 12.59),
            "[SM] Cu(II)-NH3, I -> 0 (from memory); compilations span about 4.0-4.3, "
            "7.5-8.0, 10.3-11.0, 11.8-13.3", spread=0.4, dh_per_ligand=-22.8)
    + _series("nickel", "ammonia", "Ni", "NH3", (2.72, 4.89, 6.55, 7.67, 8.34, 8.31),
              "[SM] Ni(II)-NH3 (from memory)", spread=0.3, dh_per_ligand=-16.7)
    + _series("zinc", "ammonia", "Zn", "NH3", (2.21, 4.50, 6.86, 8.89),
              "[SM] Zn(II)-NH3 (from memory)", spread=0.3, dh_per_ligand=-11.0)
    + _series("cadmium", "ammonia", "Cd", "NH3", (2.55, 4.56, 5.90, 6.74),
              "[SM] Cd(II)-NH3 (from memory)", spread=0.3, dh_per_ligand=-14.0))

_CYANIDES = (
    _series("zinc", "cyanide", "Zn", "CN", (None, 11.07, 16.05, 19.62),
            "[SM] Zn(II)-CN (from memory)", spread=0.3)
    + _series("cadmium", "cyanide", "Cd", "CN", (5.48, 10.60, 15.23, 18.78),
              "[SM] Cd(II)-CN (from memory)", spread=0.3)
    + (Complex("Ni(CN)4-2", (("nickel", 1), ("cyanide", 4)), 0, 30.22, None, 0.5,
               "[SM] Ni(CN)4 2- (from memory); forms slowly from aquated nickel"),
       Complex("Fe(CN)6-4", (("iron_ii", 1), ("cyanide", 6)), 0, 35.4, None, 0.5,
               "[SM] ferrocyanide (from memory): kinetically inert, not released in a "
               "weak-acid-dissociable cyanide test"),
       Complex("Fe(CN)6-3", (("iron_iii", 1), ("cyanide", 6)), 0, 43.6, None, 0.5,
               "[SM] ferricyanide (from memory): kinetically inert, as ferrocyanide")))

_EDTA = tuple(_pair(m, "edta", f"{s}Y", k, None, 0.5,
                    f"[SM] {s}-EDTA, I = 0.1 (from memory)")
              for m, s, k in (("copper", "Cu", 18.80), ("nickel", "Ni", 18.62),
                              ("zinc", "Zn", 16.50), ("cadmium", "Cd", 16.46),
                              ("lead", "Pb", 18.04), ("iron_ii", "Fe(II)", 14.32),
                              ("iron_iii", "Fe(III)", 25.1), ("aluminium", "Al", 16.13),
                              ("calcium", "Ca", 10.69), ("magnesium", "Mg", 8.79),
                              ("manganese", "Mn", 13.87), ("chromium_iii", "Cr(III)", 23.4)))

_CITRATES = tuple(_pair(m, "citrate", f"{s}Cit", k, None, 0.5,
                        f"[SM] {s}-citrate ML (from memory)")
                  for m, s, k in (("copper", "Cu", 5.90), ("nickel", "Ni", 5.40),
                                  ("zinc", "Zn", 4.98), ("cadmium", "Cd", 3.75),
                                  ("lead", "Pb", 4.34), ("iron_ii", "Fe(II)", 4.40),
                                  ("iron_iii", "Fe(III)", 11.85), ("aluminium", "Al", 7.98),
                                  ("calcium", "Ca", 3.50), ("magnesium", "Mg", 3.37),
                                  ("manganese", "Mn", 3.67)))

_TARTRATES = tuple(_pair(m, "tartrate", f"{s}Tart", k, None, 0.5,
                         f"[SM] {s}-tartrate ML (from memory, low confidence)")
                   for m, s, k in (("copper", "Cu", 3.20), ("nickel", "Ni", 2.06),
                                   ("zinc", "Zn", 2.68), ("cadmium", "Cd", 2.80),
                                   ("lead", "Pb", 3.78), ("iron_iii", "Fe(III)", 7.49),
                                   ("calcium", "Ca", 1.80), ("magnesium", "Mg", 1.36)))

_GLUCONATES = tuple(_pair(m, "gluconate", f"{s}Glu", k, None, 0.7,
                          f"[SM] {s}-gluconate ML (from memory, low confidence; its "
                          "hydroxo complexes above pH 10 are not modelled)")
                    for m, s, k in (("copper", "Cu", 3.30), ("zinc", "Zn", 1.70),
                                    ("cadmium", "Cd", 1.30), ("lead", "Pb", 2.40),
                                    ("iron_iii", "Fe(III)", 6.30), ("aluminium", "Al", 2.70),
                                    ("calcium", "Ca", 1.21), ("magnesium", "Mg", 0.70)))

_SULFATE_PAIRS = (
    _pair("calcium", "sulfate", "CaSO4", 2.30, 6.9, 0.1, "[N90] (from memory)"),
    _pair("magnesium", "sulfate", "MgSO4", 2.37, 19.0, 0.1, "[N90] (from memory)"),
    _pair("aluminium", "sulfate", "AlSO4+", 3.50, 9.6, 0.2, "[N90] (from memory)"),
    _pair("aluminium", "sulfate", "Al(SO4)2-", 5.00, 12.9, 0.3, "[N90] (from memory)", n=2),
    _pair("iron_ii", "sulfate", "FeSO4", 2.25, 13.5, 0.2, "[N90] (from memory)"),
    _pair("iron_iii", "sulfate", "FeSO4+", 4.04, 16.4, 0.2, "[N90] (from memory)"),
    _pair("iron_iii", "sulfate", "Fe(SO4)2-", 5.38, 19.2, 0.3, "[N90] (from memory)", n=2),
    _pair("zinc", "sulfate", "ZnSO4", 2.37, 5.7, 0.2, "[P13] (from memory)"),
    _pair("zinc", "sulfate", "Zn(SO4)2-2", 3.28, None, 0.3, "[P13] (from memory)", n=2),
    _pair("copper", "sulfate", "CuSO4", 2.31, 5.1, 0.2, "[P07] (from memory)"),
    _pair("nickel", "sulfate", "NiSO4", 2.29, 6.4, 0.2, "[N90] (from memory)"),
    _pair("cadmium", "sulfate", "CdSO4", 2.46, 4.5, 0.2, "[N90] (from memory)"),
    _pair("lead", "sulfate", "PbSO4", 2.75, None, 0.3, "[N90] (from memory)"),
    _pair("manganese", "sulfate", "MnSO4", 2.25, 14.1, 0.2, "[N90] (from memory)"),
)

# Carbonate: CO3 2- is the reference form, so a bicarbonate pair has h = 1
# and log K = log K(M + HCO3) + 10.329 (pK2 of [PB82]); its enthalpy adds
# that of CO3 2- + H+ = HCO3- (-14.85 kJ/mol).
_CARBONATE_PAIRS = (
    _pair("calcium", "carbonate", "CaCO3", 3.224, 14.8, 0.1, "[PB82] (from memory)"),
    _pair("calcium", "carbonate", "CaHCO3+", 1.106 + 10.329, 11.26 - 14.85, 0.1,
          "[PB82] Ca + HCO3 1.106 (from memory)", h=1),
    _pair("magnesium", "carbonate", "MgCO3", 2.98, 11.35, 0.1, "[N90] (from memory)"),
    _pair("magnesium", "carbonate", "MgHCO3+", 1.07 + 10.329, 3.31 - 14.85, 0.1,
          "[N90] Mg + HCO3 1.07 (from memory)", h=1),
    _pair("copper", "carbonate", "CuCO3", 6.73, None, 0.3, "[P07] (from memory)"),
    _pair("copper", "carbonate", "Cu(CO3)2-2", 9.83, None, 0.4, "[P07] (from memory)", n=2),
    _pair("lead", "carbonate", "PbCO3", 7.24, None, 0.3, "[N90] (from memory)"),
    _pair("lead", "carbonate", "Pb(CO3)2-2", 10.64, None, 0.4, "[N90] (from memory)", n=2),
    _pair("zinc", "carbonate", "ZnCO3", 5.30, None, 0.3, "[P13] (from memory)"),
    _pair("manganese", "carbonate", "MnHCO3+", 1.95 + 10.329, None, 0.3,
          "[N90] Mn + HCO3 1.95 (from memory)", h=1),
    _pair("iron_ii", "carbonate", "FeHCO3+", 2.00 + 10.329, None, 0.3,
          "[N90] Fe + HCO3 2.0 (from memory)", h=1),
)

_FLUORIDES = (
    _series("aluminium", "fluoride", "Al", "F", (7.00, 12.70, 16.80, 19.40),
            "[N90] Al-F (from memory)", spread=0.2)
    + _series("iron_iii", "fluoride", "Fe(III)", "F", (6.20, 10.80),
              "[N90] Fe(III)-F (from memory)", spread=0.3)
    + (_pair("calcium", "fluoride", "CaF+", 0.94, 17.2, 0.2, "[N90] (from memory)"),
       _pair("magnesium", "fluoride", "MgF+", 1.82, 13.4, 0.2, "[N90] (from memory)")))

#: Every complex and ion pair, with the ligand set it belongs to.
LIGAND_SETS: dict[str, tuple[Complex, ...]] = {
    "ammonia": _AMMINES, "cyanide": _CYANIDES, "edta": _EDTA, "citrate": _CITRATES,
    "tartrate": _TARTRATES, "gluconate": _GLUCONATES, "sulfate": _SULFATE_PAIRS,
    "carbonate": _CARBONATE_PAIRS, "fluoride": _FLUORIDES,
}
COMPLEXES: tuple[Complex, ...] = tuple(c for cs in LIGAND_SETS.values() for c in cs)
