#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The Python binding's tests (bindings/python/tests, pytest) against the
# library in this build tree.  Debian's /usr/bin/python3 with python3-pytest,
# python3-numpy, python3-pandas, python3-scipy and python3-statsmodels is
# required: a missing package is a failure, not a skip.
set -u
if [ -n "${TWOFOLD_SKIP_BINDINGS:-}" ]; then
  # The sanitizer build's library needs the ASan runtime loaded first, which
  # an outside interpreter or program does not do; the normal build runs it.
  echo "*** SKIPPED under sanitizers (TWOFOLD_SKIP_BINDINGS=1): $(basename "$0") runs in the normal build ***"
  exit 77
fi
: "${top_srcdir:?}" "${top_builddir:?}"
py=/usr/bin/python3
lib="$top_builddir/lib/.libs/libtwofold.so"
if [ ! -x "$py" ]; then
  echo "FAIL: $py not found (Debian package python3)" >&2
  exit 1
fi
if [ ! -f "$lib" ]; then
  echo "FAIL: $lib not built (configure with --enable-shared)" >&2
  exit 1
fi
missing=""
for m in pytest:python3-pytest numpy:python3-numpy pandas:python3-pandas \
         scipy:python3-scipy statsmodels:python3-statsmodels; do
  "$py" -c "import ${m%%:*}" 2>/dev/null || missing="$missing ${m#*:}"
done
if [ -n "$missing" ]; then
  echo "FAIL: missing Debian packages:$missing (tools/setup installs them)" >&2
  exit 1
fi
export TWOFOLD_LIBRARY="$lib"
# No cache or bytecode in the (possibly read-only) source tree.
cd "$top_srcdir" || exit 1
PYTHONDONTWRITEBYTECODE=1 "$py" -m pytest -q -p no:cacheprovider \
  bindings/python/tests
rc=$?
if [ "$rc" -eq 5 ]; then
  echo "FAIL: pytest collected no tests" >&2
  exit 1
fi
exit "$rc"
