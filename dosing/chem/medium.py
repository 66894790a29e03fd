"""Activity of each species under a species-wise model: the water's own medium.

Under the specific ion interaction model (:mod:`.sit`) every ion's activity
coefficient depends on the ions of opposite charge around it. For a view of
waters (a :class:`~dosing.chem.speciation.Rows`) at one activity of H+ and
one ionic strength, :func:`species_wise` gives the fractions of every form
and an :class:`ActivityAt` (the per-water state and log γ of each form, of
H+ and of OH-), with the medium's sums taken from the view's own ions:
its strong ions (as sodium and chloride) and every charged form, refined by
a few passes from a sodium chloride medium.
"""

from __future__ import annotations

from functools import lru_cache
from typing import NamedTuple

import numpy as np

from . import sit
from .activity import ActivityState
from .columns import COLUMN_IDS, Z
from .fractions import fractions

__all__ = ["ActivityAt", "eps_forms", "per_water", "species_wise", "I_CEILING"]

#: Ionic strength above which a trial is capped, and a fixed point abandoned [mol/L].
I_CEILING = 20.0


class ActivityAt(NamedTuple):
    """log10 γ of the view's species at one pH, for a species-wise model
    (:class:`~dosing.chem.activity.SpecificIonInteraction`)."""

    state: ActivityState              #: per water (n,)
    lg: np.ndarray                    #: (n, mc, 5) log10 γ of each form [-]
    lg_h: np.ndarray                  #: (n,) of H+
    lg_oh: np.ndarray                 #: (n,) of OH-


@lru_cache(maxsize=256)
def eps_forms(cols: tuple[int, ...]) -> np.ndarray:
    """(mc, 5) interaction coefficient of each form of each column (:mod:`.sit`)."""
    return np.array([[sit.epsilon_of(COLUMN_IDS[c], int(Z[c, f])) for f in range(Z.shape[1])]
                     for c in cols]).reshape(len(cols), Z.shape[1])


def per_water(st: ActivityState, dims: int) -> ActivityState:
    """The state's fields as (n, 1, ...) to broadcast against ions."""
    return ActivityState(*(x.reshape(x.shape + (1,) * dims) for x in st))


#: Passes over the medium's sums of a species-wise model (each ion's γ
#: depends on the others' amounts; three passes settle it to well below
#: the coefficients' own uncertainty).
_MEDIUM_PASSES = 3


def _capped(e, m):
    """An ε-weighted sum scaled down with its molality where that is capped."""
    return e * np.minimum(1.0, I_CEILING / np.maximum(m, 1e-300))


def species_wise(r, ah, ionic):
    """(alpha, ActivityAt) of a species-wise model: the medium's sums from
    the view's own ions (strong ions as sodium and chloride), refined by
    :data:`_MEDIUM_PASSES` passes from a sodium chloride medium."""
    model = r.activity
    i = np.minimum(ionic, I_CEILING)
    st = model.state(i, r.a)
    eps = eps_forms(tuple(int(c) for c in r.cols))
    cat = np.maximum(r.strong_i + 0.5 * r.strong, 0.0)
    an = np.maximum(r.strong_i - 0.5 * r.strong, 0.0)
    pos, neg = (r.z > 0), (r.z < 0)
    for _ in range(_MEDIUM_PASSES):
        lg = model.log_gamma_ion(r.z[None], eps[None], per_water(st, 2))
        lg_h = model.log_gamma_ion(1, sit.EPS_H, st)
        lg_oh = model.log_gamma_ion(-1, sit.EPS_OH, st)
        kp = np.multiply(np.moveaxis(r.k, -1, 0),
                         np.moveaxis(10.0 ** (lg[:, :, :-1] - lg[:, :, 1:]), -1, 0), order="C")
        alpha = fractions(ah, kp)
        c = r.totals[:, :, None] * alpha
        # A trial pH far from the root implies absurd amounts of H+ or OH-:
        # they are capped where the ionic strength is (the answer never sits there).
        h = np.minimum(ah / 10.0 ** np.maximum(lg_h, -30.0), I_CEILING)
        oh = np.minimum(r.kw / (ah * 10.0 ** np.maximum(lg_oh, -30.0)), I_CEILING)
        m_cat = np.einsum("nmf,mf->n", c, pos) + cat + h
        m_an = np.einsum("nmf,mf->n", c, neg) + an + oh
        st = model.with_medium(
            st, np.minimum(m_cat, I_CEILING),
            _capped(np.einsum("nmf,mf->n", c, pos * eps) + sit.EPS_NA_CL * cat + sit.EPS_H * h,
                    m_cat),
            np.minimum(m_an, I_CEILING),
            _capped(np.einsum("nmf,mf->n", c, neg * eps) + sit.EPS_NA_CL * an + sit.EPS_OH * oh,
                    m_an), i)
    lg = model.log_gamma_ion(r.z[None], eps[None], per_water(st, 2))
    return alpha, ActivityAt(st, lg, model.log_gamma_ion(1, sit.EPS_H, st),
                             model.log_gamma_ion(-1, sit.EPS_OH, st))
