# SPDX-License-Identifier: GPL-3.0-or-later
"""Bayesian changepoints in the growth rate (twofold_changes_*,
twofold_online_*).

The library computes everything: the exact recursions of Fearnhead (2006,
Statistics and Computing 16:203-213) for the offline posterior and the
online particle filter of Fearnhead & Liu (2007, JRSS B 69:589-605).  A
change "on day i" means day i is the first day of the new growth regime.
"""

import collections
import ctypes

import numpy as np

from . import _lib
from . import _convert as cv
from ._lib import TwofoldError, lib

__all__ = ["ChangeResult", "Change", "Segment", "find_changes",
           "OnlineChanges"]

Change = collections.namedtuple("Change", ["date", "day", "date_from",
                                           "date_to", "prob"])
Change.__doc__ = """One change of the most probable segmentation: date (the
first day of the new regime; None without dates), day (0-based index),
[date_from, date_to] its credible date interval and prob the posterior
probability (or expected number of changes) in that interval."""

Segment = collections.namedtuple("Segment", ["start", "end", "rate",
                                             "rate_lo", "rate_hi", "level"])
Segment.__doc__ = """One segment of the most probable segmentation: first
and last date (0-based day indices when there are no dates), growth rate
with credible interval, and the weekday-neutral count level."""

_c = ctypes
_P = _c.POINTER
_PROTOTYPES = {
    "twofold_cp_kind_from_string": (_c.c_int, [_c.c_char_p]),
    "twofold_cp_kind_to_string": (_c.c_char_p, [_c.c_int]),
    "twofold_cp_options_new": (_c.c_int, [_lib.c_void_pp]),
    "twofold_cp_options_free": (None, [_c.c_void_p]),
    "twofold_cp_options_errmsg": (_c.c_char_p, [_c.c_void_p]),
    "twofold_cp_options_set_kind": (_c.c_int, [_c.c_void_p, _c.c_int]),
    "twofold_cp_options_set_changes_per_year": (_c.c_int, [_c.c_void_p,
                                                           _c.c_double]),
    "twofold_cp_options_set_change_prob": (_c.c_int, [_c.c_void_p,
                                                      _c.c_double]),
    "twofold_cp_options_set_min_segment": (_c.c_int, [_c.c_void_p, _c.c_int]),
    "twofold_cp_options_set_length_shape": (_c.c_int, [_c.c_void_p,
                                                       _c.c_int]),
    "twofold_cp_options_set_rate_prior": (_c.c_int, [_c.c_void_p,
                                                     _c.c_double,
                                                     _c.c_double]),
    "twofold_cp_options_set_level_prior": (_c.c_int, [_c.c_void_p,
                                                      _c.c_double,
                                                      _c.c_double]),
    "twofold_cp_options_set_dispersion": (_c.c_int, [_c.c_void_p,
                                                     _c.c_double]),
    "twofold_cp_options_set_weekday": (_c.c_int, [_c.c_void_p, _c.c_int]),
    "twofold_cp_options_set_prune": (_c.c_int, [_c.c_void_p, _c.c_double]),
    "twofold_cp_options_set_max_changes": (_c.c_int, [_c.c_void_p, _c.c_int]),
    "twofold_cp_options_set_level": (_c.c_int, [_c.c_void_p, _c.c_double]),
    "twofold_cp_options_set_grid": (_c.c_int, [_c.c_void_p, _c.c_int]),
    "twofold_cp_options_get_max_changes": (_c.c_int, [_c.c_void_p]),
    "twofold_changes_new": (_c.c_int, [_lib.c_void_pp]),
    "twofold_changes_free": (None, [_c.c_void_p]),
    "twofold_changes_run": (_c.c_int, [_c.c_void_p, _c.c_void_p,
                                       _lib.c_double_p, _c.c_size_t,
                                       _c.c_int]),
    "twofold_changes_status": (_c.c_int, [_c.c_void_p]),
    "twofold_changes_errmsg": (_c.c_char_p, [_c.c_void_p]),
    "twofold_changes_length": (_c.c_size_t, [_c.c_void_p]),
    "twofold_changes_kind": (_c.c_int, [_c.c_void_p]),
    "twofold_changes_dispersion": (_c.c_double, [_c.c_void_p]),
    "twofold_changes_weekday_effect": (_c.c_double, [_c.c_void_p, _c.c_int]),
    "twofold_changes_log_evidence": (_c.c_double, [_c.c_void_p]),
    "twofold_changes_p_change": (_c.c_int, [_c.c_void_p, _lib.c_double_p]),
    "twofold_changes_growth": (_c.c_int, [_c.c_void_p, _lib.c_double_p,
                                          _lib.c_double_p, _lib.c_double_p]),
    "twofold_changes_doubling": (_c.c_int, [_c.c_void_p, _lib.c_double_p,
                                            _lib.c_double_p, _lib.c_double_p,
                                            _lib.c_int_p]),
    "twofold_changes_count_prob": (_c.c_int, [_c.c_void_p, _lib.c_double_p,
                                              _c.c_size_t, _lib.c_double_p]),
    "twofold_changes_count_mean": (_c.c_double, [_c.c_void_p]),
    "twofold_changes_map_count": (_c.c_size_t, [_c.c_void_p]),
    "twofold_changes_map_change": (_c.c_int, [_c.c_void_p, _c.c_size_t,
                                              _lib.c_size_t_p,
                                              _lib.c_size_t_p,
                                              _lib.c_size_t_p,
                                              _lib.c_double_p]),
    "twofold_changes_map_segment": (_c.c_int, [_c.c_void_p, _c.c_size_t,
                                               _lib.c_size_t_p,
                                               _lib.c_size_t_p,
                                               _lib.c_double_p,
                                               _lib.c_double_p,
                                               _lib.c_double_p,
                                               _lib.c_double_p]),
    "twofold_changes_sample": (_c.c_int, [_c.c_void_p, _c.c_uint64,
                                          _c.c_size_t, _P(_c.c_ubyte),
                                          _lib.c_double_p, _lib.c_size_t_p]),
    "twofold_changes_segment_logml": (_c.c_int, [_c.c_void_p, _c.c_size_t,
                                                 _c.c_size_t,
                                                 _lib.c_double_p]),
    "twofold_changes_length_prior": (_c.c_int, [_c.c_void_p, _c.c_size_t,
                                                _c.c_int, _lib.c_double_p,
                                                _lib.c_double_p]),
    "twofold_online_new": (_c.c_int, [_c.c_void_p, _lib.c_double_p,
                                      _c.c_size_t, _c.c_int, _c.c_size_t,
                                      _c.c_uint64, _lib.c_void_pp]),
    "twofold_online_free": (None, [_c.c_void_p]),
    "twofold_online_errmsg": (_c.c_char_p, [_c.c_void_p]),
    "twofold_online_add": (_c.c_int, [_c.c_void_p, _c.c_double]),
    "twofold_online_days": (_c.c_size_t, [_c.c_void_p]),
    "twofold_online_candidates": (_c.c_size_t, [_c.c_void_p]),
    "twofold_online_p_recent": (_c.c_int, [_c.c_void_p, _c.c_size_t,
                                           _lib.c_double_p]),
    "twofold_online_growth": (_c.c_int, [_c.c_void_p, _lib.c_double_p,
                                         _lib.c_double_p, _lib.c_double_p]),
    "twofold_online_log_predictive": (_c.c_double, [_c.c_void_p]),
}
for _name, (_res, _args) in _PROTOTYPES.items():
    try:
        _f = getattr(lib, _name)
    except AttributeError:
        continue
    _f.restype = _res
    _f.argtypes = _args
    _lib.available.add(_name)


class _CpOptions:
    """A twofold_cp_options handle from keyword arguments (None = the
    library's default)."""

    _SCALARS = (("changes_per_year", "changes_per_year", float),
                ("change_prob", "change_prob", float),
                ("min_segment", "min_segment", int),
                ("length_shape", "length_shape", int),
                ("dispersion", "dispersion", float),
                ("prune", "prune", float),
                ("max_changes", "max_changes", int),
                ("level", "level", float),
                ("grid", "grid", int))

    def __init__(self, kind=None, weekday=None, rate_prior=None,
                 level_prior=None, **scalars):
        _lib.need("twofold_cp_options_new")
        unknown = set(scalars) - {k for k, _, _ in self._SCALARS}
        if unknown:
            raise TypeError("unknown changepoint option(s): %s"
                            % ", ".join(sorted(unknown)))
        self.handle = _lib.new_handle(lib.twofold_cp_options_new)
        try:
            if kind is not None:
                self._set(lib.twofold_cp_options_set_kind,
                          _lib.enum_code("cp_kind", kind))
            if weekday is not None:
                self._set(lib.twofold_cp_options_set_weekday,
                          1 if weekday else 0)
            if rate_prior is not None:
                mean, sd = rate_prior
                self._set(lib.twofold_cp_options_set_rate_prior, float(mean),
                          float(sd))
            if level_prior is not None:
                alpha, beta = level_prior
                self._set(lib.twofold_cp_options_set_level_prior,
                          float(alpha), float(beta))
            for key, setter, conv in self._SCALARS:
                if scalars.get(key) is not None:
                    self._set(getattr(lib, "twofold_cp_options_set_" + setter),
                              conv(scalars[key]))
        except BaseException:
            self.close()
            raise

    def _set(self, setter, *args):
        st = setter(self.handle, *args)
        if st < 0:
            raise TwofoldError(st, _lib._decode(
                lib.twofold_cp_options_errmsg(self.handle)) or None)

    def close(self):
        if self.handle is not None:
            lib.twofold_cp_options_free(self.handle)
            self.handle = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def _weekday(first_day, first_weekday):
    if first_weekday is not None:
        return int(first_weekday)
    if first_day is not None:
        return lib.twofold_date_weekday(int(first_day))
    return None


class ChangeResult:
    """The changepoint posterior of one series (from find_changes).

    Attributes (per-day numpy arrays have one element per day):
        dates: datetime64[D] array, or None without dates.
        kind: "kink", "jump" or "level".
        p_change: P(day i is the first day of a new regime | data).
        rate, rate_lo, rate_hi: posterior mean growth rate per day and its
            credible interval.
        doubling: DoublingTime of per-day arrays (growth.DoublingTime).
        count_prob: P(number of changes = m), m = 0..max_changes; count_tail
            the probability of more; count_mean the posterior mean.
        changes: list of Change (the most probable segmentation).
        segments: list of Segment.
        dispersion, weekday_effects (Monday first), log_evidence.
    """

    def __init__(self, handle, first_day, max_changes):
        from .growth import DoublingTime
        self._handle = handle
        self._first_day = first_day
        n = int(lib.twofold_changes_length(handle))
        self.dates = None if first_day is None else cv.day_range(first_day,
                                                                 n)
        self.kind = _lib._decode(lib.twofold_cp_kind_to_string(
            lib.twofold_changes_kind(handle)))
        self.p_change = np.empty(n)
        self.rate, self.rate_lo, self.rate_hi = (np.empty(n), np.empty(n),
                                                 np.empty(n))
        _lib.check(lib.twofold_changes_p_change(handle,
                                                cv.as_ptr(self.p_change)))
        _lib.check(lib.twofold_changes_growth(handle, cv.as_ptr(self.rate),
                                              cv.as_ptr(self.rate_lo),
                                              cv.as_ptr(self.rate_hi)))
        t, tl, th = np.empty(n), np.empty(n), np.empty(n)
        sense = np.zeros(n, dtype=np.intc)
        _lib.check(lib.twofold_changes_doubling(
            handle, cv.as_ptr(t), cv.as_ptr(tl), cv.as_ptr(th),
            sense.ctypes.data_as(_lib.c_int_p)))
        self.doubling = DoublingTime(t, tl, th, sense.astype(int))
        size = int(max_changes) + 1
        cp = np.zeros(size)
        tail = ctypes.c_double()
        _lib.check(lib.twofold_changes_count_prob(handle, cv.as_ptr(cp), size,
                                                  ctypes.byref(tail)))
        self.count_prob = cp
        self.count_tail = tail.value
        self.count_mean = lib.twofold_changes_count_mean(handle)
        self.dispersion = lib.twofold_changes_dispersion(handle)
        self.weekday_effects = np.array(
            [lib.twofold_changes_weekday_effect(handle, d)
             for d in range(1, 8)])
        self.log_evidence = lib.twofold_changes_log_evidence(handle)
        self.changes = []
        day, lo, hi = ctypes.c_size_t(), ctypes.c_size_t(), ctypes.c_size_t()
        prob = ctypes.c_double()
        for k in range(lib.twofold_changes_map_count(handle)):
            _lib.check(lib.twofold_changes_map_change(
                handle, k, ctypes.byref(day), ctypes.byref(lo),
                ctypes.byref(hi), ctypes.byref(prob)))
            self.changes.append(Change(self._date(day.value), day.value,
                                       self._date(lo.value),
                                       self._date(hi.value), prob.value))
        self.segments = []
        s, e = ctypes.c_size_t(), ctypes.c_size_t()
        r, rl, rh, lev = (ctypes.c_double(), ctypes.c_double(),
                          ctypes.c_double(), ctypes.c_double())
        for k in range(len(self.changes) + 1):
            _lib.check(lib.twofold_changes_map_segment(
                handle, k, ctypes.byref(s), ctypes.byref(e), ctypes.byref(r),
                ctypes.byref(rl), ctypes.byref(rh), ctypes.byref(lev)))
            self.segments.append(Segment(
                self._date(s.value, index=True), self._date(e.value,
                                                            index=True),
                r.value, rl.value, rh.value, lev.value))

    def _date(self, i, index=False):
        if self._first_day is None:
            return int(i) if index else None
        return cv.to_date(self._first_day + int(i))

    def __del__(self):
        handle, self._handle = getattr(self, "_handle", None), None
        if handle is not None and lib is not None:
            lib.twofold_changes_free(handle)

    def __len__(self):
        return len(self.p_change)

    def __repr__(self):
        return "ChangeResult(kind=%s, days=%d, changes=%s)" % (
            self.kind, len(self), [c.date or c.day for c in self.changes])

    def sample(self, draws, seed):
        """Draw segmentations from the posterior (seeded: the same seed
        gives the same draws).  Returns (change, rate, count): change a
        bool array draws x days (True where a day starts a new regime),
        rate the growth rate per draw and day, count the number of changes
        per draw."""
        n = len(self)
        change = np.zeros((int(draws), n), dtype=np.uint8)
        rate = np.zeros((int(draws), n))
        count = np.zeros(int(draws), dtype=np.uintp)
        _lib.check(lib.twofold_changes_sample(
            self._handle, int(seed), int(draws),
            change.ctypes.data_as(ctypes.POINTER(ctypes.c_ubyte)),
            cv.as_ptr(rate), count.ctypes.data_as(_lib.c_size_t_p)))
        return change.astype(bool), rate, count.astype(int)

    def segment_logml(self, start, end):
        """Log marginal likelihood of days start..end (0-based indices) as
        one segment (jump and level kinds)."""
        out = ctypes.c_double()
        _lib.check(lib.twofold_changes_segment_logml(
            self._handle, int(start), int(end), ctypes.byref(out)))
        return out.value

    def length_prior(self, length, first=False):
        """(log P(segment length == length), log P(length >= length)) under
        the prior; first=True for the first segment."""
        pmf, surv = ctypes.c_double(), ctypes.c_double()
        _lib.check(lib.twofold_changes_length_prior(
            self._handle, int(length), 1 if first else 0, ctypes.byref(pmf),
            ctypes.byref(surv)))
        return pmf.value, surv.value

    def to_frame(self):
        """Per-day pandas DataFrame: date (when known), p_change, rate,
        rate_lo, rate_hi, doubling_time, doubling_lo, doubling_hi, sense."""
        if cv.pd is None:
            raise ImportError("twofold: to_frame needs pandas")
        data = {}
        if self.dates is not None:
            data["date"] = cv.pd.DatetimeIndex(self.dates)
        data.update({"p_change": self.p_change, "rate": self.rate,
                     "rate_lo": self.rate_lo, "rate_hi": self.rate_hi,
                     "doubling_time": self.doubling.time,
                     "doubling_lo": self.doubling.lo,
                     "doubling_hi": self.doubling.hi,
                     "sense": self.doubling.sense})
        return cv.pd.DataFrame(data)


def find_changes(counts, start=None, *, first_weekday=None, kind=None,
                 weekday=None, rate_prior=None, level_prior=None,
                 changes_per_year=None, change_prob=None, min_segment=None,
                 length_shape=None, dispersion=None, prune=None,
                 max_changes=None, level=None, grid=None):
    """The changepoint posterior of a daily series (twofold_changes_run).

    counts, start: as for fit_window (a Series with a DatetimeIndex gives
        its dates; without dates weekday effects need first_weekday, or
        weekday=False).
    kind: "kink" (growth changes, level continuous; the default), "jump"
        or "level".
    rate_prior: (mean, sd) of a segment's growth rate; level_prior:
        (alpha, beta) of the count level's gamma prior.
    changes_per_year or change_prob, min_segment, length_shape: the prior
        on segment lengths.  dispersion: 0 estimates it, >= 1 fixes it.
    prune, max_changes, level (credible level), grid: see libtwofold(3).
    Options left None take the library's defaults.

    Returns a ChangeResult.  Raises TwofoldError with the library's message.
    """
    _lib.need("twofold_changes_run")
    y, first_day = cv.daily(counts, start)
    wd = _weekday(first_day, first_weekday)
    if wd is None:
        if weekday is not False:
            raise ValueError("weekday effects need the dates: give start= "
                             "(or first_weekday=, or weekday=False)")
        wd = 1
    with _CpOptions(kind, weekday, rate_prior, level_prior,
                    changes_per_year=changes_per_year,
                    change_prob=change_prob, min_segment=min_segment,
                    length_shape=length_shape, dispersion=dispersion,
                    prune=prune, max_changes=max_changes, level=level,
                    grid=grid) as opts:
        handle = _lib.new_handle(lib.twofold_changes_new)
        st = lib.twofold_changes_run(handle, opts.handle, cv.as_ptr(y),
                                     len(y), wd)
        if st < 0:
            msg = _lib._decode(lib.twofold_changes_errmsg(handle))
            lib.twofold_changes_free(handle)
            raise TwofoldError(st, msg or None)
        # From here the result owns the handle (freed by its __del__, also
        # when its construction fails).
        return ChangeResult(handle, first_day,
                            lib.twofold_cp_options_get_max_changes(
                                opts.handle))


class OnlineChanges:
    """The online changepoint filter of Fearnhead & Liu (2007), fed one day
    at a time (kink, jump and level kinds).

    OnlineChanges(max_candidates, seed, history=None, start=None, ...):
    history (counts, as for fit_window) estimates weekday effects,
    dispersion and the level prior and is fed to the filter; start is the
    date of the first day (of the history, or of the first added day);
    max_candidates (>= 2) bounds the candidate last changes kept, seed
    seeds their resampling.  Changepoint options as for find_changes.
    """

    def __init__(self, max_candidates, seed, history=None, start=None, *,
                 first_weekday=None, **options):
        _lib.need("twofold_online_new")
        self._handle = None
        hist, first_day = (cv.daily(history, start) if history is not None
                           else (None, None if start is None
                                 else cv.to_day(start)))
        wd = _weekday(first_day, first_weekday)
        if wd is None:
            if options.get("weekday") is not False:
                raise ValueError("weekday effects need the dates: give "
                                 "start= (or first_weekday=, or "
                                 "weekday=False)")
            wd = 1
        self._first_day = first_day
        kind = options.pop("kind", None)
        weekday = options.pop("weekday", None)
        rate_prior = options.pop("rate_prior", None)
        level_prior = options.pop("level_prior", None)
        with _CpOptions(kind, weekday, rate_prior, level_prior,
                        **options) as opts:
            out = ctypes.c_void_p()
            n = 0 if hist is None else len(hist)
            st = lib.twofold_online_new(opts.handle, cv.as_ptr(hist), n, wd,
                                        int(max_candidates), int(seed),
                                        ctypes.byref(out))
            if st < 0:
                raise TwofoldError(st)
            self._handle = out

    def __del__(self):
        handle, self._handle = getattr(self, "_handle", None), None
        if handle is not None and lib is not None:
            lib.twofold_online_free(handle)

    def _check(self, st):
        if st < 0:
            raise TwofoldError(st, _lib._decode(
                lib.twofold_online_errmsg(self._handle)) or None)

    def add(self, count):
        """Add the next day's count (None or NaN: a missing day)."""
        self._check(lib.twofold_online_add(
            self._handle, np.nan if count is None else float(count)))

    def extend(self, counts):
        """Add several days in order."""
        for c in cv.float_counts(counts):
            self.add(c)

    @property
    def days(self):
        """Days fed so far, history included."""
        return int(lib.twofold_online_days(self._handle))

    @property
    def today(self):
        """The date of the last day fed (None without dates)."""
        if self._first_day is None or self.days == 0:
            return None
        return cv.to_date(self._first_day + self.days - 1)

    @property
    def candidates(self):
        """Candidate last changes kept."""
        return int(lib.twofold_online_candidates(self._handle))

    def p_recent(self, k):
        """P(a new regime started within the last k days | data so far)."""
        out = ctypes.c_double()
        self._check(lib.twofold_online_p_recent(self._handle, int(k),
                                                ctypes.byref(out)))
        return out.value

    def growth(self):
        """(mean, lo, hi): today's growth rate with credible interval."""
        m, lo, hi = ctypes.c_double(), ctypes.c_double(), ctypes.c_double()
        self._check(lib.twofold_online_growth(self._handle, ctypes.byref(m),
                                              ctypes.byref(lo),
                                              ctypes.byref(hi)))
        return m.value, lo.value, hi.value

    @property
    def log_predictive(self):
        """log p(y_t | y_1..t-1) of the last day added (NaN if none)."""
        return lib.twofold_online_log_predictive(self._handle)
