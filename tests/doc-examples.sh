#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Run the Python and R examples of the documentation (blocks marked
# "<!-- example: python -->" / "<!-- example: r -->") against this build
# tree: the Python package from the source tree, the R package installed
# into a scratch library.  DOC_EXAMPLES_FILE names the Markdown file
# (default README.md).
set -u
if [ -n "${TWOFOLD_SKIP_BINDINGS:-}" ]; then
  # The sanitizer build's library needs the ASan runtime loaded first, which
  # an outside interpreter or program does not do; the normal build runs it.
  echo "*** SKIPPED under sanitizers (TWOFOLD_SKIP_BINDINGS=1): $(basename "$0") runs in the normal build ***"
  exit 77
fi
: "${top_srcdir:?}" "${top_builddir:?}"
doc=${DOC_EXAMPLES_FILE:-$top_srcdir/README.md}
[ -f "$doc" ] || { echo "FAIL: $doc not found" >&2; exit 1; }
/usr/bin/python3 -c 'import numpy, pandas' 2>/dev/null || {
  echo "FAIL: /usr/bin/python3 lacks numpy or pandas (python3-numpy, python3-pandas)" >&2; exit 1; }
tmp=$(mktemp -d "${TMPDIR:-/tmp}/twofold-doc.XXXXXX")
trap 'rm -rf "$tmp"' EXIT
. "$top_srcdir/tests/r-env.sh"
mkdir -p "$tmp/lib"
"$R_BIN" CMD INSTALL --no-test-load --library="$tmp/lib" "$tmp/src/twofold" \
  >"$tmp/install.log" 2>&1 || {
  cat "$tmp/install.log" >&2; r_env_fail "R CMD INSTALL failed"; }
export R_LIBS="$tmp/lib" R="$R_BIN"
export TWOFOLD_LIBRARY="$top_builddir/lib/.libs/libtwofold.so"
export PYTHONPATH="$top_srcdir/bindings/python${PYTHONPATH:+:$PYTHONPATH}"
export PYTHONDONTWRITEBYTECODE=1
exec /usr/bin/python3 "$top_srcdir/tests/doc-examples-runner.py" \
  --cwd "$top_srcdir" --require python,r "$doc"
