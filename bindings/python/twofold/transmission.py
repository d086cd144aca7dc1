# SPDX-License-Identifier: GPL-3.0-or-later
"""Reproduction numbers from growth rates (twofold_gi_*).

The library computes R = 1 / M(-r), M the moment generating function of
the generation-interval distribution: Wallinga J, Lipsitch M (2007). How
generation intervals shape the relationship between growth rates and
reproductive numbers. Proc R Soc B 274:599-604.
"""

import ctypes

import numpy as np

from . import _lib
from . import _convert as cv
from ._lib import lib

__all__ = ["GenerationInterval", "reproduction_number"]


class GenerationInterval:
    """A generation-interval distribution held by the library.

    Build one with GenerationInterval.gamma(mean, sd) or
    GenerationInterval.discrete(p).
    """

    def __init__(self, handle):
        self._handle = handle

    @classmethod
    def gamma(cls, mean, sd):
        """A gamma generation interval by mean and standard deviation in
        days (both > 0)."""
        _lib.need("twofold_gi_new_gamma")
        return cls(_lib.new_handle(lib.twofold_gi_new_gamma, float(mean),
                                   float(sd)))

    @classmethod
    def discrete(cls, p):
        """A discrete generation interval: p[k] is the probability (or a
        non-negative weight, normalised by the library) of k+1 days."""
        _lib.need("twofold_gi_new_discrete")
        arr = np.ascontiguousarray(p, dtype=np.float64)
        return cls(_lib.new_handle(lib.twofold_gi_new_discrete,
                                   cv.as_ptr(arr), len(arr)))

    def __del__(self):
        handle, self._handle = getattr(self, "_handle", None), None
        if handle is not None and lib is not None:
            lib.twofold_gi_free(handle)

    @property
    def mean(self):
        """Mean generation interval in days."""
        return lib.twofold_gi_mean(self._handle)

    @property
    def sd(self):
        """Standard deviation of the generation interval in days."""
        return lib.twofold_gi_sd(self._handle)

    def __repr__(self):
        return "GenerationInterval(mean=%g, sd=%g)" % (self.mean, self.sd)

    def reproduction(self, rate, rate_lo=None, rate_hi=None):
        """R for a growth rate per day; with rate_lo and rate_hi also R's
        interval, returned as (R, R_lo, R_hi).  Scalars only; see
        reproduction_number for arrays."""
        if rate_lo is None and rate_hi is None:
            out = ctypes.c_double()
            _lib.check(lib.twofold_gi_reproduction(self._handle, float(rate),
                                                   ctypes.byref(out)))
            return out.value
        if rate_lo is None or rate_hi is None:
            raise ValueError("give both rate_lo and rate_hi, or neither")
        R, lo, hi = ctypes.c_double(), ctypes.c_double(), ctypes.c_double()
        _lib.check(lib.twofold_gi_reproduction_interval(
            self._handle, float(rate), float(rate_lo), float(rate_hi),
            ctypes.byref(R), ctypes.byref(lo), ctypes.byref(hi)))
        return R.value, lo.value, hi.value


def reproduction_number(rate, gi, rate_lo=None, rate_hi=None):
    """Reproduction numbers from growth rates (per day) under generation
    interval gi.

    rate (and optionally rate_lo, rate_hi): scalars or arrays.  Returns R
    (scalar or array) without bounds, or a tuple (R, R_lo, R_hi) with them;
    NaN rates give NaN.
    """
    with_bounds = rate_lo is not None or rate_hi is not None
    if np.ndim(rate) == 0 and np.ndim(rate_lo) == 0 and np.ndim(rate_hi) == 0:
        return gi.reproduction(rate, rate_lo, rate_hi)
    r = np.asarray(rate, dtype=float)
    if not with_bounds:
        out = np.full(r.shape, np.nan)
        for i in np.ndindex(r.shape):
            if not np.isnan(r[i]):
                out[i] = gi.reproduction(r[i])
        return out
    r, lo, hi = np.broadcast_arrays(r, np.asarray(rate_lo, dtype=float),
                                    np.asarray(rate_hi, dtype=float))
    R = np.full(r.shape, np.nan)
    Rl = np.full(r.shape, np.nan)
    Rh = np.full(r.shape, np.nan)
    for i in np.ndindex(r.shape):
        if np.isnan(r[i]) or np.isnan(lo[i]) or np.isnan(hi[i]):
            continue
        R[i], Rl[i], Rh[i] = gi.reproduction(r[i], lo[i], hi[i])
    return R, Rl, Rh
