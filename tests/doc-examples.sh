#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Run the Python and R examples of the documentation (blocks marked
# "<!-- example: python -->" / "<!-- example: r -->") against this build
# tree: the Python package from the source tree, the R package installed
# into a scratch library.  DOC_EXAMPLES_FILE names the Markdown file
# (default bindings/README-sections.md).
set -u
: "${top_srcdir:?}" "${top_builddir:?}"
doc=${DOC_EXAMPLES_FILE:-$top_srcdir/bindings/README-sections.md}
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
exec /usr/bin/python3 "$top_srcdir/tests/doc-examples.py" \
  --cwd "$top_srcdir" --require python,r "$doc"
