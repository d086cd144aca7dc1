# SPDX-License-Identifier: GPL-3.0-or-later
"""Growth rates: window fits, rolling fits and doubling times.

Every number comes from libtwofold (twofold_growth_fit, twofold_growth_roll,
twofold_doubling_time); this module only translates arguments and results.
The model, per window of days t = 0..n-1:

    log mu_t = a + r*t [+ weekday effect] [+ offset_t],

y_t Poisson, quasi-Poisson or negative binomial (NB2); r is the growth rate
per day and ln 2 / r the doubling time.
"""

import collections
import ctypes

import numpy as np

from . import _lib
from . import _convert as cv
from ._lib import TwofoldError, lib

__all__ = ["WindowFit", "RollingFit", "DoublingTime", "fit_window",
           "roll_window", "doubling_time", "latest_growth"]

_FLAG_NAMES = ((0x1, "missing_days"), (0x2, "theta_capped"),
               (0x4, "large_counts"))

DoublingTime = collections.namedtuple("DoublingTime",
                                      ["time", "lo", "hi", "sense"])
DoublingTime.__doc__ = """Doubling (sense +1) or halving (sense -1) time in
days with its interval; sense 0 means no growth (time infinite).  An
interval end that is infinite means the data are consistent with no growth
(or no decline) at all."""


class _Options:
    """A twofold_fit_options handle built from keyword arguments; None
    leaves the library's default."""

    def __init__(self, model=None, level=None, weekday=None, interval=None,
                 min_events=None, max_iterations=None, tolerance=None):
        _lib.need("twofold_fit_options_new", "twofold_growth_fit")
        self.handle = _lib.new_handle(lib.twofold_fit_options_new)
        try:
            if model is not None:
                _lib.check(lib.twofold_fit_options_set_model(
                    self.handle, _lib.enum_code("model", model)))
            if level is not None:
                _lib.check(lib.twofold_fit_options_set_level(
                    self.handle, float(level)), "level must be in (0, 1)")
            if weekday is not None:
                _lib.check(lib.twofold_fit_options_set_weekday(
                    self.handle, 1 if weekday else 0))
            if interval is not None:
                _lib.check(lib.twofold_fit_options_set_interval(
                    self.handle, _lib.enum_code("interval", interval)))
            if min_events is not None:
                _lib.check(lib.twofold_fit_options_set_min_events(
                    self.handle, float(min_events)))
            if max_iterations is not None:
                _lib.check(lib.twofold_fit_options_set_max_iterations(
                    self.handle, int(max_iterations)))
            if tolerance is not None:
                _lib.check(lib.twofold_fit_options_set_tolerance(
                    self.handle, float(tolerance)))
        except BaseException:
            self.close()
            raise
        self.weekday = weekday

    def close(self):
        if self.handle is not None:
            lib.twofold_fit_options_free(self.handle)
            self.handle = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def _first_weekday(first_day, first_weekday, weekday):
    if first_weekday is not None:
        return int(first_weekday)
    if first_day is not None:
        return lib.twofold_date_weekday(int(first_day))
    if weekday is False:
        return 1  # no weekday effects: the weekday is not used
    raise ValueError("weekday effects need the dates: give start= (or a "
                     "pandas Series with a DatetimeIndex, or first_weekday=)")


def _offset(offset, n):
    if offset is None:
        return None
    arr = cv.float_counts(offset)
    if len(arr) != n:
        raise ValueError("offset has %d values, counts %d" % (len(arr), n))
    return arr


def _flag_names(flags):
    return tuple(name for bit, name in _FLAG_NAMES if flags & bit)


class WindowFit:
    """The result of fit_window: the growth rate on one window and the
    fit's details, read from the library.

    Attributes:
        start, end: first and last date of the window (None without dates).
        model: "poisson", "quasipoisson" or "negbin".
        rate, rate_se: growth rate per day and its standard error.
        rate_lo, rate_hi: interval for the rate, of the default kind, at
            level.
        level: the interval's level (e.g. 0.95).
        doubling: a DoublingTime for rate and [rate_lo, rate_hi].
        intercept: log-level at the window's first day.
        weekday_effects: numpy array of 7 log-scale effects, Monday first
            (zeros when weekday effects are off).
        theta: NB dispersion parameter (inf for Poisson models).
        dispersion: Pearson X^2 / residual df.
        loglik, deviance, iterations, events, days_used, days_missing,
        df_residual: as the library reports them.
        flags: tuple of flag names ("missing_days", "theta_capped",
            "large_counts").
    """

    def __init__(self, handle, first_day, n):
        self._handle = handle
        self.start = None if first_day is None else cv.to_date(first_day)
        self.end = None if first_day is None else cv.to_date(first_day + n - 1)
        self.model = _lib._decode(lib.twofold_model_to_string(
            lib.twofold_fit_model(handle)))
        self.rate = lib.twofold_fit_rate(handle)
        self.rate_se = lib.twofold_fit_rate_se(handle)
        self.level = lib.twofold_fit_level(handle)
        self.rate_lo, self.rate_hi = self.interval("default")
        self.doubling = doubling_time(self.rate, self.rate_lo, self.rate_hi)
        self.intercept = lib.twofold_fit_intercept(handle)
        self.weekday_effects = np.array(
            [lib.twofold_fit_weekday_effect(handle, d) for d in range(1, 8)])
        self.theta = lib.twofold_fit_theta(handle)
        self.dispersion = lib.twofold_fit_dispersion(handle)
        self.loglik = lib.twofold_fit_loglik(handle)
        self.deviance = lib.twofold_fit_deviance(handle)
        self.iterations = lib.twofold_fit_iterations(handle)
        self.events = lib.twofold_fit_events(handle)
        self.days_used = int(lib.twofold_fit_days_used(handle))
        self.days_missing = int(lib.twofold_fit_days_missing(handle))
        self.df_residual = lib.twofold_fit_df_residual(handle)
        self.flags = _flag_names(lib.twofold_fit_flags(handle))

    def __del__(self):
        handle, self._handle = getattr(self, "_handle", None), None
        if handle is not None and lib is not None:
            lib.twofold_fit_free(handle)

    def interval(self, kind="default"):
        """(lo, hi) for the growth rate: kind "default", "wald", "profile"
        or "small", at the fit's level (twofold_fit_interval)."""
        lo, hi = ctypes.c_double(), ctypes.c_double()
        _lib.check(lib.twofold_fit_interval(
            self._handle, _lib.enum_code("interval", kind),
            ctypes.byref(lo), ctypes.byref(hi)))
        return lo.value, hi.value

    def reproduction(self, gi):
        """(R, R_lo, R_hi) for this fit's rate and interval under the
        generation interval gi (a GenerationInterval)."""
        return gi.reproduction(self.rate, self.rate_lo, self.rate_hi)

    def as_dict(self):
        """The main results as a plain dict."""
        return {"start": self.start, "end": self.end, "model": self.model,
                "rate": self.rate, "rate_se": self.rate_se,
                "rate_lo": self.rate_lo, "rate_hi": self.rate_hi,
                "level": self.level, "doubling_time": self.doubling.time,
                "doubling_lo": self.doubling.lo,
                "doubling_hi": self.doubling.hi,
                "sense": self.doubling.sense, "theta": self.theta,
                "dispersion": self.dispersion, "events": self.events,
                "days_used": self.days_used,
                "days_missing": self.days_missing,
                "flags": ",".join(self.flags)}

    def __repr__(self):
        return ("WindowFit(%s..%s, model=%s, rate=%.6g [%.6g, %.6g], "
                "doubling=%s)" % (self.start, self.end, self.model, self.rate,
                                  self.rate_lo, self.rate_hi,
                                  tuple(self.doubling)))


def fit_window(counts, start=None, *, offset=None, first_weekday=None,
               model=None, level=None, weekday=None, interval=None,
               min_events=None, max_iterations=None, tolerance=None):
    """Fit the growth rate on one window of daily counts (twofold_growth_fit).

    counts: sequence, numpy array or pandas Series of daily counts (NaN or
        None = missing day; a Series with a DatetimeIndex gives the dates).
    start: the first day's date (needed for weekday effects unless counts
        has a DatetimeIndex or first_weekday is given).
    offset: optional log-offsets, one per day (log population, log tests).
    first_weekday: ISO weekday (1 = Monday) of the first day, instead of a
        date.
    model: "poisson", "quasipoisson" or "negbin"; level: interval level in
        (0, 1); weekday: day-of-week effects on/off; interval: default kind
        ("default", "wald", "profile", "small"); min_events,
        max_iterations, tolerance: see libtwofold(3).  None leaves the
        library's default (negbin, 0.95, weekday effects on).

    Returns a WindowFit.  Raises TwofoldError (e.g. TWOFOLD_EZERO,
    TWOFOLD_EFEWEVENTS, TWOFOLD_EWEEKDAY) with the library's message when
    the window cannot be fitted.
    """
    y, first_day = cv.daily(counts, start)
    off = _offset(offset, len(y))
    with _Options(model, level, weekday, interval, min_events,
                  max_iterations, tolerance) as opts:
        wd = _first_weekday(first_day, first_weekday, weekday)
        handle = _lib.new_handle(lib.twofold_fit_new)
        st = lib.twofold_growth_fit(handle, opts.handle, cv.as_ptr(y),
                                    cv.as_ptr(off), len(y), wd)
        if st < 0:
            msg = _lib._decode(lib.twofold_fit_errmsg(handle))
            lib.twofold_fit_free(handle)
            raise TwofoldError(st, msg or None)
        return WindowFit(handle, first_day, len(y))


class RollingFit:
    """The result of roll_window: per-day growth rates.

    Attributes:
        dates: numpy datetime64[D] array (None without dates).
        window, align: the window length and alignment used.
        rate, rate_lo, rate_hi: float arrays (NaN where no fit).
        status: int array, 0 or the TWOFOLD_E... code of that day's fit.
    """

    def __init__(self, first_day, window, align, rate, lo, hi, status):
        n = len(rate)
        self.dates = None if first_day is None else cv.day_range(first_day, n)
        self.window = window
        self.align = align
        self.rate = rate
        self.rate_lo = lo
        self.rate_hi = hi
        self.status = status

    def __len__(self):
        return len(self.rate)

    def status_names(self):
        """The status of each day as the library names it ("TWOFOLD_OK",
        "TWOFOLD_EZERO", ...)."""
        return [_lib.status_name(s) for s in self.status]

    def doubling(self):
        """Per-day DoublingTime of numpy arrays (NaN, sense 0 where no
        fit)."""
        return doubling_time(self.rate, self.rate_lo, self.rate_hi)

    def to_frame(self):
        """A pandas DataFrame with date, rate, rate_lo, rate_hi,
        doubling_time, doubling_lo, doubling_hi, sense and status (needs
        pandas)."""
        if cv.pd is None:
            raise ImportError("twofold: to_frame needs pandas")
        pd = cv.pd
        dt = self.doubling()
        data = {}
        if self.dates is not None:
            data["date"] = pd.DatetimeIndex(self.dates)
        data.update({"rate": self.rate, "rate_lo": self.rate_lo,
                     "rate_hi": self.rate_hi, "doubling_time": dt.time,
                     "doubling_lo": dt.lo, "doubling_hi": dt.hi,
                     "sense": dt.sense, "status": self.status_names()})
        return pd.DataFrame(data)


def roll_window(counts, window, start=None, *, align="trailing", offset=None,
                first_weekday=None, model=None, level=None, weekday=None,
                interval=None, min_events=None, max_iterations=None,
                tolerance=None):
    """Growth rate on every day from windows of window days
    (twofold_growth_roll).

    counts, start, offset, first_weekday and the fit options are as for
    fit_window; align is "trailing" (day i uses days i-w+1..i) or "centred".
    Returns a RollingFit; days whose window cannot be fitted have NaN rates
    and a non-zero status.
    """
    _lib.need("twofold_growth_roll")
    y, first_day = cv.daily(counts, start)
    n = len(y)
    off = _offset(offset, n)
    if int(window) < 1:
        raise ValueError("window must be at least 1 day")
    rate = np.full(n, np.nan)
    lo = np.full(n, np.nan)
    hi = np.full(n, np.nan)
    status = np.zeros(n, dtype=np.intc)
    with _Options(model, level, weekday, interval, min_events,
                  max_iterations, tolerance) as opts:
        wd = _first_weekday(first_day, first_weekday, weekday)
        al = _lib.enum_code("align", align)
        _lib.check(lib.twofold_growth_roll(
            opts.handle, cv.as_ptr(y), cv.as_ptr(off), n, wd, int(window),
            al, cv.as_ptr(rate), cv.as_ptr(lo), cv.as_ptr(hi),
            status.ctypes.data_as(_lib.c_int_p)))
    return RollingFit(first_day, int(window), align, rate, lo, hi,
                      status.astype(int))


def _doubling_scalar(r, lo, hi):
    t, tl, th = ctypes.c_double(), ctypes.c_double(), ctypes.c_double()
    sense = ctypes.c_int()
    _lib.check(lib.twofold_doubling_time(float(r), float(lo), float(hi),
                                         ctypes.byref(t), ctypes.byref(tl),
                                         ctypes.byref(th),
                                         ctypes.byref(sense)))
    return DoublingTime(t.value, tl.value, th.value, sense.value)


def doubling_time(rate, rate_lo=None, rate_hi=None):
    """Doubling or halving time from a growth rate and its interval
    (twofold_doubling_time).

    rate, rate_lo, rate_hi: scalars or arrays of equal length (rate_lo and
    rate_hi default to rate).  Returns a DoublingTime (time, lo, hi, sense);
    for arrays each field is an array, and elements whose rate or bounds are
    NaN get NaN times and sense 0.
    """
    if rate_lo is None:
        rate_lo = rate
    if rate_hi is None:
        rate_hi = rate
    if np.ndim(rate) == 0 and np.ndim(rate_lo) == 0 and np.ndim(rate_hi) == 0:
        return _doubling_scalar(rate, rate_lo, rate_hi)
    r, lo, hi = np.broadcast_arrays(np.asarray(rate, dtype=float),
                                    np.asarray(rate_lo, dtype=float),
                                    np.asarray(rate_hi, dtype=float))
    t = np.full(r.shape, np.nan)
    tl = np.full(r.shape, np.nan)
    th = np.full(r.shape, np.nan)
    sense = np.zeros(r.shape, dtype=int)
    for i in np.ndindex(r.shape):
        if np.isnan(r[i]) or np.isnan(lo[i]) or np.isnan(hi[i]):
            continue
        t[i], tl[i], th[i], sense[i] = _doubling_scalar(r[i], lo[i], hi[i])
    return DoublingTime(t, tl, th, sense)


def latest_growth(regions, window, column=None, **options):
    """Fit the last window days of every region.

    regions: a dict region -> DailySeries (as read_csv and from_frame
        return), an iterable of DailySeries, or a long-format pandas
        DataFrame (read with from_frame's defaults).
    window: days in the window; column: which count column (default the
        primary one); options: fit options as for fit_window.

    Returns a pandas DataFrame (one row per region: region, start, end,
    rate, rate_lo, rate_hi, doubling_time, doubling_lo, doubling_hi, sense,
    model, status, message) when pandas is installed, else a list of dicts
    with those keys.  A region whose window cannot be fitted gets NaN
    numbers, its status name and the library's message.
    """
    from .series import from_frame  # local import: series imports pandas lazily
    if cv.pd is not None and isinstance(regions, cv.pd.DataFrame):
        regions = from_frame(regions)
    if isinstance(regions, dict):
        regions = list(regions.values())
    rows = []
    for ds in regions:
        y = ds.column(column)
        n = min(int(window), len(y))
        first = ds.first_day + len(y) - n
        row = {"region": ds.region, "start": cv.to_date(first),
               "end": cv.to_date(first + n - 1)}
        try:
            fit = fit_window(y[len(y) - n:], first, **options)
        except TwofoldError as e:
            row.update({"rate": np.nan, "rate_lo": np.nan, "rate_hi": np.nan,
                        "doubling_time": np.nan, "doubling_lo": np.nan,
                        "doubling_hi": np.nan, "sense": 0, "model": None,
                        "status": e.name, "message": e.message})
        else:
            row.update({"rate": fit.rate, "rate_lo": fit.rate_lo,
                        "rate_hi": fit.rate_hi,
                        "doubling_time": fit.doubling.time,
                        "doubling_lo": fit.doubling.lo,
                        "doubling_hi": fit.doubling.hi,
                        "sense": fit.doubling.sense, "model": fit.model,
                        "status": "TWOFOLD_OK", "message": ""})
        rows.append(row)
    if cv.pd is None:
        return rows
    frame = cv.pd.DataFrame(rows, columns=[
        "region", "start", "end", "rate", "rate_lo", "rate_hi",
        "doubling_time", "doubling_lo", "doubling_hi", "sense", "model",
        "status", "message"])
    frame["start"] = cv.pd.to_datetime(frame["start"])
    frame["end"] = cv.pd.to_datetime(frame["end"])
    return frame
