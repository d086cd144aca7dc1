# SPDX-License-Identifier: GPL-3.0-or-later
"""Loading libtwofold through ctypes, its prototypes, and error translation.

The library is found, in this order:

1. the path in the environment variable ``TWOFOLD_LIBRARY`` (for example a
   build tree's ``lib/.libs/libtwofold.so``);
2. ``ctypes.util.find_library("twofold")`` (the ldconfig cache);
3. ``libtwofold.so.0`` through the dynamic loader's usual search path
   (``LD_LIBRARY_PATH``, ``/etc/ld.so.conf``).
"""

import ctypes
import ctypes.util
import os

__all__ = ["TwofoldError", "lib", "library_path"]

c_double_p = ctypes.POINTER(ctypes.c_double)
c_int_p = ctypes.POINTER(ctypes.c_int)
c_int32_p = ctypes.POINTER(ctypes.c_int32)
c_size_t_p = ctypes.POINTER(ctypes.c_size_t)
c_void_pp = ctypes.POINTER(ctypes.c_void_p)

ERROR_FILE_SIZE = 256
ERROR_TEXT_SIZE = 512


class ErrorReport(ctypes.Structure):
    """Mirror of struct twofold_error (checked against twofold_error_size)."""

    _fields_ = [
        ("code", ctypes.c_int),
        ("line", ctypes.c_long),
        ("column", ctypes.c_long),
        ("file", ctypes.c_char * ERROR_FILE_SIZE),
        ("text", ctypes.c_char * ERROR_TEXT_SIZE),
    ]


class TwofoldError(Exception):
    """An error reported by libtwofold.

    Attributes:
        code: the library's negative status code (e.g. -8).
        name: the code's name (e.g. ``"TWOFOLD_EDATE"``).
        message: the library's detailed message; for reader errors it
            starts with ``FILE:LINE:COLUMN:``.
        file, line, column: where a reader error was found (``None`` when
            not applicable).
    """

    def __init__(self, code, message=None, file=None, line=None, column=None):
        self.code = int(code)
        self.name = _decode(lib.twofold_err_name(self.code))
        if not message:
            message = _decode(lib.twofold_strerror(self.code))
        self.message = message
        self.file = file or None
        self.line = line if line else None
        self.column = column if column else None
        super().__init__("%s (%s)" % (self.message, self.name))


def _decode(b):
    if b is None:
        return None
    return b.decode("utf-8", "replace")


def _encode(s):
    if s is None:
        return None
    if isinstance(s, bytes):
        return s
    return os.fsencode(s) if isinstance(s, os.PathLike) else str(s).encode("utf-8")


def _candidates():
    env = os.environ.get("TWOFOLD_LIBRARY")
    if env:
        return [env], True
    names = []
    found = ctypes.util.find_library("twofold")
    if found:
        names.append(found)
    names.append("libtwofold.so.0")
    return names, False


def _load():
    names, from_env = _candidates()
    errors = []
    for name in names:
        try:
            return ctypes.CDLL(name), name
        except OSError as e:
            errors.append("%s: %s" % (name, e))
    hint = ("TWOFOLD_LIBRARY points at a file that cannot be loaded"
            if from_env else
            "install libtwofold (make install; ldconfig) or set "
            "TWOFOLD_LIBRARY to the path of libtwofold.so")
    raise ImportError("twofold: cannot load libtwofold (%s): %s"
                      % (hint, "; ".join(errors)))


lib, library_path = _load()

# Prototypes: name -> (restype, argtypes).  Functions the loaded library does
# not export (an older build) are left out; calling them raises
# TwofoldError(TWOFOLD_EINVAL) through missing().
V = ctypes.c_void_p
I = ctypes.c_int
D = ctypes.c_double
S = ctypes.c_size_t
C = ctypes.c_char_p
I32 = ctypes.c_int32
DP = c_double_p
_PROTOTYPES = {
    "twofold_version": (ctypes.c_uint, []),
    "twofold_version_string": (C, []),
    "twofold_strerror": (C, [I]),
    "twofold_err_name": (C, [I]),
    "twofold_error_size": (S, []),
    "twofold_date_weekday": (I, [I32]),
    "twofold_date_parse": (I, [C, S, c_int32_p]),
    # series
    "twofold_series_new": (I, [C, I32, S, C, c_void_pp]),
    "twofold_series_from_counts": (I, [C, I32, DP, S, C, c_void_pp]),
    "twofold_series_free": (None, [V]),
    "twofold_series_add_column": (I, [V, C, c_size_t_p]),
    "twofold_series_set": (I, [V, S, S, D]),
    "twofold_series_region": (C, [V]),
    "twofold_series_first_day": (I32, [V]),
    "twofold_series_length": (S, [V]),
    "twofold_series_columns": (S, [V]),
    "twofold_series_column_name": (C, [V, S]),
    "twofold_series_values": (DP, [V, S]),
    "twofold_series_missing": (S, [V, S]),
    "twofold_series_total": (D, [V, S]),
    "twofold_series_gaps": (S, [V, S]),
    "twofold_series_gap": (I, [V, S, S, c_size_t_p, c_size_t_p]),
    # sets
    "twofold_set_new": (I, [c_void_pp]),
    "twofold_set_free": (None, [V]),
    "twofold_set_add": (I, [V, V]),
    "twofold_set_count": (S, [V]),
    "twofold_set_at": (V, [V, S]),
    "twofold_set_total": (I, [V, C, c_void_pp]),
    # reader
    "twofold_layout_from_string": (I, [C]),
    "twofold_read_options_new": (I, [c_void_pp]),
    "twofold_read_options_free": (None, [V]),
    "twofold_read_options_set_layout": (I, [V, I]),
    "twofold_read_options_set_region_column": (I, [V, C]),
    "twofold_read_options_set_date_column": (I, [V, C]),
    "twofold_read_options_set_count_column": (I, [V, C]),
    "twofold_read_file": (I, [C, V, c_void_pp, ctypes.POINTER(ErrorReport)]),
    "twofold_read_memory": (I, [ctypes.c_char_p, S, C, V, c_void_pp,
                                ctypes.POINTER(ErrorReport)]),
    # growth
    "twofold_model_to_string": (C, [I]),
    "twofold_model_from_string": (I, [C]),
    "twofold_interval_to_string": (C, [I]),
    "twofold_interval_from_string": (I, [C]),
    "twofold_align_from_string": (I, [C]),
    "twofold_fit_options_new": (I, [c_void_pp]),
    "twofold_fit_options_free": (None, [V]),
    "twofold_fit_options_set_model": (I, [V, I]),
    "twofold_fit_options_set_level": (I, [V, D]),
    "twofold_fit_options_set_weekday": (I, [V, I]),
    "twofold_fit_options_set_interval": (I, [V, I]),
    "twofold_fit_options_get_interval": (I, [V]),
    "twofold_fit_options_set_min_events": (I, [V, D]),
    "twofold_fit_options_set_max_iterations": (I, [V, I]),
    "twofold_fit_options_set_tolerance": (I, [V, D]),
    "twofold_fit_new": (I, [c_void_pp]),
    "twofold_fit_free": (None, [V]),
    "twofold_growth_fit": (I, [V, V, DP, DP, S, I]),
    "twofold_fit_status": (I, [V]),
    "twofold_fit_errmsg": (C, [V]),
    "twofold_fit_flags": (ctypes.c_uint, [V]),
    "twofold_fit_model": (I, [V]),
    "twofold_fit_rate": (D, [V]),
    "twofold_fit_rate_se": (D, [V]),
    "twofold_fit_interval": (I, [V, I, DP, DP]),
    "twofold_fit_level": (D, [V]),
    "twofold_fit_intercept": (D, [V]),
    "twofold_fit_weekday_effect": (D, [V, I]),
    "twofold_fit_theta": (D, [V]),
    "twofold_fit_dispersion": (D, [V]),
    "twofold_fit_loglik": (D, [V]),
    "twofold_fit_deviance": (D, [V]),
    "twofold_fit_iterations": (I, [V]),
    "twofold_fit_events": (D, [V]),
    "twofold_fit_days_used": (S, [V]),
    "twofold_fit_days_missing": (S, [V]),
    "twofold_fit_df_residual": (D, [V]),
    "twofold_doubling_time": (I, [D, D, D, DP, DP, DP, c_int_p]),
    "twofold_growth_roll": (I, [V, DP, DP, S, I, S, I, DP, DP, DP, c_int_p]),
    # transmission
    "twofold_gi_new_gamma": (I, [D, D, c_void_pp]),
    "twofold_gi_new_discrete": (I, [DP, S, c_void_pp]),
    "twofold_gi_free": (None, [V]),
    "twofold_gi_mean": (D, [V]),
    "twofold_gi_sd": (D, [V]),
    "twofold_gi_reproduction": (I, [V, D, DP]),
    "twofold_gi_reproduction_interval": (I, [V, D, D, D, DP, DP, DP]),
}
del V, I, D, S, C, I32, DP

available = set()
for _name, (_res, _args) in _PROTOTYPES.items():
    try:
        _f = getattr(lib, _name)
    except AttributeError:
        continue
    _f.restype = _res
    _f.argtypes = _args
    available.add(_name)

for _name in ("twofold_version", "twofold_strerror", "twofold_err_name",
              "twofold_error_size"):
    if _name not in available:
        raise ImportError("twofold: %s does not export %s"
                          % (library_path, _name))
if lib.twofold_error_size() != ctypes.sizeof(ErrorReport):
    raise ImportError("twofold: struct twofold_error in %s has size %d, "
                      "the binding expects %d"
                      % (library_path, lib.twofold_error_size(),
                         ctypes.sizeof(ErrorReport)))

# Status codes by name, as the library names them: CODES["EDATE"] == -8.
CODES = {}
for _code in range(-1, -128, -1):
    _n = _decode(lib.twofold_err_name(_code))
    if _n.startswith("TWOFOLD_E") and _n != "TWOFOLD_EUNKNOWN":
        CODES[_n[len("TWOFOLD_"):]] = _code


def need(*names):
    """Raise TwofoldError unless the loaded library exports every name."""
    for name in names:
        if name not in available:
            raise TwofoldError(CODES["EINVAL"], "%s does not export %s (built without "
                               "that module?)" % (library_path, name))


def check(status, message=None):
    """Raise TwofoldError for a negative status; return it otherwise."""
    if status < 0:
        raise TwofoldError(status, message)
    return status


def raise_report(status, report):
    """Raise TwofoldError from a filled struct twofold_error."""
    code = report.code if report.code < 0 else status
    raise TwofoldError(code, _decode(report.text) or None,
                       file=_decode(report.file) or None,
                       line=int(report.line), column=int(report.column))


def enum_code(kind, value):
    """The library's code for an enum given by name (or by its code)."""
    if isinstance(value, int) and not isinstance(value, bool):
        return value
    func = "twofold_%s_from_string" % kind
    need(func)
    code = getattr(lib, func)(_encode(value))
    if code < 0:
        raise TwofoldError(code, "unknown %s name %r" % (kind, value))
    return code


def status_name(code):
    """The library's name of a status code, e.g. 'TWOFOLD_EZERO'."""
    return _decode(lib.twofold_err_name(int(code)))


def status_text(code):
    """The library's short message for a status code."""
    return _decode(lib.twofold_strerror(int(code)))


def new_handle(func, *args):
    """Call a ..._new(..., &out) function and return the handle."""
    out = ctypes.c_void_p()
    check(func(*args, ctypes.byref(out)))
    return out
