# SPDX-License-Identifier: GPL-3.0-or-later
"""Type translation between Python/numpy/pandas and libtwofold.

Only unit conversion happens here: dates to day numbers (day 0 is
1970-01-01, as in the C API) and back, and counts to float64 arrays with
NaN for a missing day.
"""

import ctypes
import datetime

import numpy as np

from . import _lib

try:  # pandas is optional
    import pandas as pd
except ImportError:  # pragma: no cover - exercised where pandas is absent
    pd = None

EPOCH = datetime.date(1970, 1, 1)

def have_pandas():
    """True when pandas could be imported."""
    return pd is not None


def to_day(value):
    """A day number (days since 1970-01-01) from a date-like value.

    Accepts datetime.date / datetime.datetime (the date part), numpy
    datetime64, pandas Timestamp, an int day number, or an ISO 8601
    "YYYY-MM-DD" string (parsed by the library).
    """
    if value is None:
        raise ValueError("a start date is required")
    if isinstance(value, bool):
        raise TypeError("a date is required, not a bool")
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, str):
        raw = value.encode("utf-8")
        out = ctypes.c_int32()
        _lib.check(_lib.lib.twofold_date_parse(raw, len(raw),
                                               ctypes.byref(out)),
                   "not an ISO 8601 date (YYYY-MM-DD): %r" % value)
        return int(out.value)
    if pd is not None and isinstance(value, pd.Timestamp):
        value = value.to_pydatetime()
    if isinstance(value, datetime.datetime):
        value = value.date()
    if isinstance(value, datetime.date):
        return (value - EPOCH).days
    if isinstance(value, np.datetime64):
        return int(value.astype("datetime64[D]").astype(np.int64))
    raise TypeError("cannot read a date from %r" % (value,))


def to_date(day):
    """datetime.date of a day number."""
    return EPOCH + datetime.timedelta(days=int(day))


def day_range(first_day, n):
    """numpy datetime64[D] array of n consecutive days from first_day."""
    return (np.arange(n, dtype=np.int64) + int(first_day)).astype(
        "datetime64[D]")


def days_of(dates):
    """int64 day numbers of a sequence of date-like values."""
    if pd is not None:
        idx = pd.DatetimeIndex(pd.to_datetime(dates))
        if idx.tz is not None:
            idx = idx.tz_localize(None)
        arr = idx.values.astype("datetime64[D]")
    else:
        arr = np.asarray(dates)
        if arr.dtype.kind in "OU":
            arr = np.array([to_day(d) for d in arr], dtype=np.int64)
            return arr
        arr = arr.astype("datetime64[D]")
    if np.isnat(arr).any():
        raise ValueError("missing (NaT) dates")
    return arr.astype(np.int64)


def float_counts(values):
    """A contiguous float64 copy of values with NaN for missing entries."""
    if pd is not None and isinstance(values, (pd.Series, pd.Index)):
        arr = values.to_numpy(dtype=np.float64, na_value=np.nan)
    else:
        if isinstance(values, np.ma.MaskedArray):
            values = values.astype(np.float64).filled(np.nan)
        arr = np.asarray(values)
        if arr.dtype == object:
            arr = np.array([np.nan if v is None else v for v in arr.ravel()],
                           dtype=np.float64).reshape(arr.shape)
        arr = arr.astype(np.float64)
    arr = np.ascontiguousarray(arr, dtype=np.float64)
    if arr.ndim != 1:
        raise ValueError("counts must be one-dimensional")
    return arr.copy()


def daily(counts, start=None):
    """(values, first_day) from counts and an optional start date.

    counts may be a sequence, a numpy array or a pandas Series; a Series
    with a DatetimeIndex gives its own dates (days absent from the index
    become missing days) and start must then be None or equal to its first
    date.  first_day is None when no date is known.
    """
    if pd is not None and isinstance(counts, pd.Series) and \
            isinstance(counts.index, pd.DatetimeIndex):
        if len(counts) == 0:
            return np.empty(0), (None if start is None else to_day(start))
        days = days_of(counts.index)
        if len(np.unique(days)) != len(days):
            raise ValueError("the Series index repeats a date")
        order = np.argsort(days, kind="stable")
        days = days[order]
        vals = float_counts(counts.iloc[order])
        first = int(days[0])
        if start is not None and to_day(start) != first:
            raise ValueError("start differs from the Series' first date")
        out = np.full(int(days[-1]) - first + 1, np.nan)
        out[days - first] = vals
        return out, first
    vals = float_counts(counts)
    return vals, (None if start is None else to_day(start))


def as_ptr(arr):
    """ctypes double pointer into a float64 numpy array (None for None)."""
    if arr is None:
        return None
    return arr.ctypes.data_as(_lib.c_double_p)
