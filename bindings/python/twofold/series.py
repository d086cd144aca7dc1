# SPDX-License-Identifier: GPL-3.0-or-later
"""Daily count series per region: reading CSV files and DataFrames."""

import ctypes
import os

import numpy as np

from . import _lib
from . import _convert as cv
from ._lib import TwofoldError, lib

__all__ = ["DailySeries", "read_csv", "from_frame", "total"]


class DailySeries:
    """One region's daily counts on consecutive days.

    Attributes:
        region: the region's name.
        first_day: day number of the first day (days since 1970-01-01).
        columns: dict of column name -> float64 numpy array (NaN marks a
            missing day); the first column is the primary one.
    """

    __slots__ = ("region", "first_day", "columns")

    def __init__(self, region, first_day, columns):
        self.region = str(region)
        self.first_day = int(first_day)
        self.columns = dict(columns)
        lengths = {len(v) for v in self.columns.values()}
        if len(lengths) > 1:
            raise ValueError("columns differ in length")
        if not self.columns:
            raise ValueError("a series needs at least one column")

    @classmethod
    def of(cls, counts, start=None, region="", column="cases"):
        """A one-column DailySeries from counts and a start date.

        counts: sequence, numpy array or pandas Series (a DatetimeIndex
        gives the dates; days absent from it become missing days).
        start: first date (date, "YYYY-MM-DD", datetime64, Timestamp).
        """
        vals, first = cv.daily(counts, start)
        if first is None:
            raise ValueError("a start date is required (or a pandas Series "
                             "with a DatetimeIndex)")
        return cls(region, first, {column: vals})

    def __len__(self):
        return len(next(iter(self.columns.values())))

    def __repr__(self):
        return "DailySeries(region=%r, start=%s, days=%d, columns=%s)" % (
            self.region, self.start, len(self), list(self.columns))

    @property
    def start(self):
        """The first date (datetime.date)."""
        return cv.to_date(self.first_day)

    @property
    def end(self):
        """The last date (datetime.date)."""
        return cv.to_date(self.first_day + len(self) - 1)

    @property
    def dates(self):
        """The dates as a numpy datetime64[D] array."""
        return cv.day_range(self.first_day, len(self))

    @property
    def values(self):
        """The primary column's counts (float64, NaN = missing)."""
        return next(iter(self.columns.values()))

    def column(self, name=None):
        """The counts of column name (the primary column when None)."""
        if name is None:
            return self.values
        try:
            return self.columns[name]
        except KeyError:
            raise TwofoldError(_lib.CODES["ENOTFOUND"], "region %r has no column %r"
                               % (self.region, name)) from None

    def gaps(self, column=None):
        """Runs of missing days, as a list of (first date, length in days),
        found by the library (twofold_series_gaps)."""
        with _CSeries(self) as s:
            col = self._index(column)
            out = []
            start = ctypes.c_size_t()
            length = ctypes.c_size_t()
            for k in range(lib.twofold_series_gaps(s.handle, col)):
                _lib.check(lib.twofold_series_gap(s.handle, col, k,
                                                  ctypes.byref(start),
                                                  ctypes.byref(length)))
                out.append((cv.to_date(self.first_day + start.value),
                            int(length.value)))
            return out

    def _index(self, column):
        if column is None:
            return 0
        names = list(self.columns)
        if column not in names:
            raise TwofoldError(_lib.CODES["ENOTFOUND"], "region %r has no column %r"
                               % (self.region, column))
        return names.index(column)

    def to_series(self, column=None):
        """A pandas Series of one column with a DatetimeIndex (needs
        pandas)."""
        pd = _need_pandas()
        idx = pd.DatetimeIndex(self.dates, name="date")
        name = column if column is not None else next(iter(self.columns))
        return pd.Series(self.column(column), index=idx, name=name)

    def to_frame(self):
        """A pandas DataFrame: region, date and one column per count column
        (needs pandas)."""
        pd = _need_pandas()
        data = {"region": [self.region] * len(self),
                "date": pd.DatetimeIndex(self.dates)}
        data.update(self.columns)
        return pd.DataFrame(data)


def _need_pandas():
    if cv.pd is None:
        raise ImportError("twofold: this function needs pandas "
                          "(Debian: python3-pandas)")
    return cv.pd


class _CSeries:
    """A temporary twofold_series holding a DailySeries' data."""

    def __init__(self, ds):
        self.ds = ds
        self.handle = None

    def __enter__(self):
        self.handle = to_c_series(self.ds)
        return self

    def __exit__(self, *exc):
        lib.twofold_series_free(self.handle)
        self.handle = None
        return False


def to_c_series(ds):
    """A new twofold_series (caller frees) with the DailySeries' columns;
    the library checks every count."""
    names = list(ds.columns)
    first = np.ascontiguousarray(ds.columns[names[0]], dtype=np.float64)
    out = ctypes.c_void_p()
    st = lib.twofold_series_from_counts(_lib._encode(ds.region), ds.first_day,
                                        cv.as_ptr(first), len(first),
                                        _lib._encode(names[0]),
                                        ctypes.byref(out))
    if st < 0:
        raise TwofoldError(st, "region %r, column %r: %s"
                           % (ds.region, names[0], _lib.status_text(st)))
    try:
        for name in names[1:]:
            idx = ctypes.c_size_t()
            _lib.check(lib.twofold_series_add_column(out, _lib._encode(name),
                                                     ctypes.byref(idx)))
            for i, v in enumerate(ds.columns[name]):
                st = lib.twofold_series_set(out, idx.value, i, float(v))
                if st < 0:
                    raise TwofoldError(st, "region %r, column %r, %s: %s" % (
                        ds.region, name, cv.to_date(ds.first_day + i),
                        _lib.status_text(st)))
    except BaseException:
        lib.twofold_series_free(out)
        raise
    return out


def from_c_series(handle):
    """A DailySeries copied out of a borrowed twofold_series."""
    n = lib.twofold_series_length(handle)
    cols = {}
    for c in range(lib.twofold_series_columns(handle)):
        name = _lib._decode(lib.twofold_series_column_name(handle, c))
        ptr = lib.twofold_series_values(handle, c)
        if n and ptr:
            cols[name] = np.ctypeslib.as_array(ptr, shape=(n,)).copy()
        else:
            cols[name] = np.full(n, np.nan)
    return DailySeries(_lib._decode(lib.twofold_series_region(handle)),
                       lib.twofold_series_first_day(handle), cols)


def _from_c_set(handle):
    out = {}
    for i in range(lib.twofold_set_count(handle)):
        ds = from_c_series(lib.twofold_set_at(handle, i))
        out[ds.region] = ds
    return out


def read_csv(source, layout="auto", region_column=None, date_column=None,
             count_column=None, name=None):
    """Read daily counts per region from a CSV file with the library's reader.

    source: a path (plain or gzip-compressed CSV), bytes holding the file's
        content, or a binary file object.
    layout: "auto", "long" (one row per region and date) or "wide" (a date
        column and one column per region).
    region_column, date_column: column names (library defaults "region" and
        "date").
    count_column: long layout: the primary count column (default: the first
        column that is neither region nor date); the other columns become
        further columns of each series.
    name: how errors name an in-memory source (default "<memory>").

    Returns a dict region -> DailySeries, in the file's order of regions.
    Raises TwofoldError whose message starts "FILE:LINE:COLUMN:" for
    malformed input (and whose .line and .column say where).
    """
    _lib.need("twofold_read_file", "twofold_read_options_new")
    opts = _lib.new_handle(lib.twofold_read_options_new)
    try:
        _lib.check(lib.twofold_read_options_set_layout(
            opts, _lib.enum_code("layout", layout)))
        for setter, value in (
                (lib.twofold_read_options_set_region_column, region_column),
                (lib.twofold_read_options_set_date_column, date_column),
                (lib.twofold_read_options_set_count_column, count_column)):
            if value is not None:
                _lib.check(setter(opts, _lib._encode(value)))
        out = ctypes.c_void_p()
        report = _lib.ErrorReport()
        if hasattr(source, "read"):
            source = source.read()
        if isinstance(source, (bytes, bytearray, memoryview)):
            data = bytes(source)
            st = lib.twofold_read_memory(data, len(data),
                                         _lib._encode(name or "<memory>"),
                                         opts, ctypes.byref(out),
                                         ctypes.byref(report))
        else:
            st = lib.twofold_read_file(_lib._encode(os.fspath(source)), opts,
                                       ctypes.byref(out),
                                       ctypes.byref(report))
        if st < 0:
            _lib.raise_report(st, report)
        try:
            return _from_c_set(out)
        finally:
            lib.twofold_set_free(out)
    finally:
        lib.twofold_read_options_free(opts)


def from_frame(frame, region="region", date="date", count=None):
    """Daily series per region from a long-format pandas DataFrame.

    frame: one row per region and date.
    region: name of the region column (None: the whole frame is one region
        named "").
    date: name of the date column (dates, Timestamps or "YYYY-MM-DD").
    count: the primary count column (default: the first column that is
        neither region nor date); the other numeric columns become further
        columns.  Days absent from the frame, and NaN/NA counts, are missing
        days (never zero).

    Returns a dict region -> DailySeries in order of first appearance.
    Raises TwofoldError (TWOFOLD_EDUPLICATE, TWOFOLD_ECOUNT, ...) for a
    repeated (region, date) or an invalid count.
    """
    pd = _need_pandas()
    if date not in frame.columns:
        raise TwofoldError(_lib.CODES["ECOLUMN"], "no date column %r" % date)
    if region is not None and region not in frame.columns:
        raise TwofoldError(_lib.CODES["ECOLUMN"], "no region column %r" % region)
    others = [c for c in frame.columns if c not in (region, date)]
    if count is None:
        if not others:
            raise TwofoldError(_lib.CODES["ECOLUMN"], "no count column")
        count = others[0]
    elif count not in frame.columns:
        raise TwofoldError(_lib.CODES["ECOLUMN"], "no count column %r" % count)
    names = [count] + [c for c in others if c != count and
                       (pd.api.types.is_numeric_dtype(frame[c]) or
                        frame[c].isna().all())]
    days = cv.days_of(frame[date])
    if region is None:
        keys = np.zeros(len(frame), dtype=np.int64)
        labels = [""]
    else:
        keys, uniq = pd.factorize(frame[region].astype(str), sort=False)
        labels = list(uniq)
    out = {}
    for k, label in enumerate(labels):
        rows = np.flatnonzero(keys == k)
        d = days[rows]
        first = int(d.min())
        pos = d - first
        seen = np.zeros(int(d.max()) - first + 1, dtype=bool)
        for r, p in zip(rows, pos):
            if seen[p]:
                raise TwofoldError(_lib.CODES["EDUPLICATE"], "region %r, date %s: %s" % (
                    label, cv.to_date(first + p),
                    _lib.status_text(_lib.CODES["EDUPLICATE"])))
            seen[p] = True
        cols = {}
        for name in names:
            col = np.full(len(seen), np.nan)
            col[pos] = cv.float_counts(frame[name].iloc[rows])
            cols[str(name)] = col
        ds = DailySeries(label, first, cols)
        lib.twofold_series_free(to_c_series(ds))  # the library checks counts
        out[label] = ds
    return out


def total(regions, name="total"):
    """The sum over regions (twofold_set_total): a DailySeries spanning the
    earliest to the latest day, present only on days every region reports,
    with the columns every region has.

    regions: a dict region -> DailySeries (as read_csv returns) or an
    iterable of DailySeries.
    """
    if isinstance(regions, dict):
        regions = list(regions.values())
    handle = _lib.new_handle(lib.twofold_set_new)
    try:
        for ds in regions:
            s = to_c_series(ds)
            st = lib.twofold_set_add(handle, s)
            if st < 0:
                lib.twofold_series_free(s)
                _lib.check(st, "region %r: %s" % (ds.region,
                                                  _lib.status_text(st)))
        out = ctypes.c_void_p()
        _lib.check(lib.twofold_set_total(handle, _lib._encode(name),
                                         ctypes.byref(out)))
        try:
            return from_c_series(out)
        finally:
            lib.twofold_series_free(out)
    finally:
        lib.twofold_set_free(handle)
