"""Interaction coefficients of the specific ion interaction model (Brønsted-Guggenheim-Scatchard).

In the specific ion interaction theory (SIT) the activity coefficient of an
ion j of charge z_j on the molal scale is

.. math::
    \\log_{10}\\gamma_j = -z_j^2 D + \\sum_k \\varepsilon(j,k)\\, m_k,
    \\qquad D = \\frac{A\\sqrt{I_m}}{1 + 1.5\\sqrt{I_m}}

where the sum runs over the ions k of opposite charge and I_m is the molal
ionic strength. Ions of like charge and neutral species get no term.

Tables give ε(j, k) pair by pair; most waste waters are mixtures no table
covers. Here every cation carries its coefficient against chloride and
every anion its coefficient against sodium (the pairs the tables list most
often), and a pair of a cation c and an anion a is taken as

    ε(c, a) = ε(c, Cl-) + ε(Na+, a) - ε(Na+, Cl-),

which is exact for the pairs of the two reference ions and an estimate for
the rest (our rule; it puts ε(H+, NO3-) at 0.05 against 0.07 listed, but
ε(Ca2+, ClO4-) at 0.12 against 0.27: a spread of about 0.1 kg/mol, which
the model's uncertainty carries). The sums then need four figures per
water: the total molality of cations and of anions, and each side's
ε-weighted molality (:func:`medium_sums` in :mod:`.activity`).

Strong ions of unknown identity (the strong-ion balance) count as sodium
and chloride. An ion with no coefficient recalled gets the estimate by
charge, :func:`estimate`: against chloride 0.03 + 0.15 (z - 1) for a
cation (0.03, 0.18, 0.33 for z = 1, 2, 3, in the middle of the listed
values), against sodium 0, -0.10, -0.25, -0.40 for an anion of charge
-1 to -4; complexes and hydroxo complexes all take the estimate.

Sources
-------
[G97]   Grenthe, I.; Plyasunov, A. V.; Spahiu, K. (1997). Estimations of
        medium effects on thermodynamic data. In: Grenthe, I.; Puigdomenech,
        I. (eds.), Modelling in Aquatic Chemistry, NEA/OECD, Paris, ch. IX and
        the tables of appendix B (from memory).
[C80]   Ciavatta, L. (1980). The specific interaction theory in evaluating
        ionic equilibria. Ann. Chim. (Rome) 70, 551-567 (from memory).
[L13]   Lemire, R. J. et al. (2013). Chemical Thermodynamics of Iron, Part 1.
        NEA/OECD, appendix B (Fe2+; from memory, low confidence).

Every value below is from memory of these tables and is marked so; the
spread of each is about 0.01-0.06 kg/mol in the tables themselves.
"""

from __future__ import annotations

__all__ = ["CATION_VS_CHLORIDE", "ANION_VS_SODIUM", "EPS_NA_CL", "EPS_H", "EPS_OH",
           "estimate", "epsilon_of", "LIMIT_MOL_KG", "SPREAD"]

#: ε(Na+, Cl-) [kg/mol] ([G97], from memory).
EPS_NA_CL = 0.03
#: ε(H+, Cl-) [kg/mol] ([G97], from memory).
EPS_H = 0.12
#: ε(Na+, OH-) [kg/mol] ([G97], from memory).
EPS_OH = 0.04
#: Molal ionic strength up to which the coefficients are used [mol/kg]: the
#: tables are fitted to about 3-4 mol/kg ([G97]); beyond it a plan is refused.
LIMIT_MOL_KG = 3.5
#: Spread of an estimated coefficient [kg/mol] (see the module notes).
SPREAD = 0.1

#: ε of each cation against chloride [kg/mol], keyed (column id, charge).
#: All from [G97] as recalled (from memory); Fe2+ from [L13].
CATION_VS_CHLORIDE: dict[tuple[str, int], float] = {
    ("ammonia", 1): -0.01,       # NH4+
    ("calcium", 2): 0.14,
    ("magnesium", 2): 0.19,
    ("iron_ii", 2): 0.17,
    ("manganese", 2): 0.13,
    ("nickel", 2): 0.17,
    ("copper", 2): 0.08,
    ("zinc", 2): 0.16,
    ("cadmium", 2): 0.09,
    ("lead", 2): 0.15,
    ("aluminium", 3): 0.33,
}

#: ε of each anion against sodium [kg/mol], keyed (column id, charge).
#: All from [G97] as recalled (from memory).
ANION_VS_SODIUM: dict[tuple[str, int], float] = {
    ("sulfate", -1): -0.01,      # HSO4-
    ("sulfate", -2): -0.12,      # SO4 2-
    ("carbonate", -1): 0.00,     # HCO3-
    ("carbonate", -2): -0.08,    # CO3 2-
    ("phosphate", -1): -0.08,    # H2PO4-
    ("phosphate", -2): -0.15,    # HPO4 2-
    ("phosphate", -3): -0.25,    # PO4 3-
    ("acetate", -1): 0.08,
    ("fluoride", -1): 0.02,
}


def estimate(charge: int) -> float:
    """ε of an ion with no coefficient recalled, by its charge [kg/mol]
    (against chloride for a cation, sodium for an anion; 0 when neutral).

    Examples
    --------
    >>> estimate(3), estimate(-2), estimate(0)
    (0.33, -0.1, 0.0)
    """
    if charge > 0:
        return round(0.03 + 0.15 * (charge - 1), 6)
    return {0: 0.0, -1: 0.0, -2: -0.10, -3: -0.25}.get(charge, -0.40)


def epsilon_of(column_id: str, charge: int) -> float:
    """ε of one form of a column [kg/mol]: listed, else :func:`estimate`."""
    table = CATION_VS_CHLORIDE if charge > 0 else ANION_VS_SODIUM
    return table.get((column_id, charge), estimate(charge))
