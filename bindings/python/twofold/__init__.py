# SPDX-License-Identifier: GPL-3.0-or-later
"""twofold: epidemic growth rates, doubling times and reproduction numbers
from daily counts per region, computed by libtwofold (loaded through ctypes).

Set TWOFOLD_LIBRARY to a libtwofold.so to use a build tree's library;
otherwise the installed libtwofold.so.0 is used.

Estimates depend on testing and reporting practice, and projections assume
conditions stay the same; interpret them with, and defer to, your local
public-health authority.

Main functions:
    read_csv(path)            daily series per region from a CSV file
    from_frame(df)            the same from a long-format pandas DataFrame
    DailySeries.of(counts, start)   one region's series from an array
    total(regions)            the sum over regions
    fit_window(counts, start) growth rate on one window -> WindowFit
    roll_window(counts, w, start)   growth rate on every day -> RollingFit
    latest_growth(regions)    last-window growth per region -> DataFrame
    doubling_time(r, lo, hi)  doubling/halving time with interval
    GenerationInterval.gamma(mean, sd), reproduction_number(r, gi)
    find_changes(counts, start)     changepoint posterior -> ChangeResult
    OnlineChanges(...)        the online changepoint filter, day by day
"""

from ._lib import TwofoldError, CODES, library_path, lib as _clib
from ._lib import _decode
from .series import DailySeries, read_csv, from_frame, total
from .growth import (WindowFit, RollingFit, DoublingTime, fit_window,
                     roll_window, doubling_time, latest_growth)
from .transmission import GenerationInterval, reproduction_number
from .changes import (ChangeResult, Change, Segment, find_changes,
                      OnlineChanges)

__all__ = ["TwofoldError", "CODES", "library_path", "version",
           "DailySeries", "read_csv", "from_frame", "total",
           "WindowFit", "RollingFit", "DoublingTime", "fit_window",
           "roll_window", "doubling_time", "latest_growth",
           "GenerationInterval", "reproduction_number",
           "ChangeResult", "Change", "Segment", "find_changes",
           "OnlineChanges"]

__version__ = "0.1.0"


def version():
    """The loaded libtwofold's version string, e.g. "0.1.0"."""
    return _decode(_clib.twofold_version_string())
