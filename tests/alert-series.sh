#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The inputs of the twofold-breaks and twofold-alert command tests are what
# the committed generator tests/make-alert-series.py writes (fixed seed).
set -u
: "${top_srcdir:?}"
PYTHON3=${PYTHON3:-/usr/bin/python3}
work=$(mktemp -d "${TMPDIR:-/tmp}/twofold-alert-series.XXXXXX") || exit 99
trap 'rm -rf "$work"' EXIT
if ! "$PYTHON3" "$top_srcdir/tests/make-alert-series.py" "$work"; then
  echo "FAIL: the generator failed (needs Debian's python3-numpy)"
  exit 1
fi
status=0
cli=$top_srcdir/tests/cli
for c in breaks-flat-csv alert-flat alert-no-region alert-usage-rules; do
  cmp -s "$work/flat.csv" "$cli/$c/input.csv" ||
    { echo "FAIL: $c/input.csv is not the generator's flat.csv"; status=1; }
done
for c in breaks-upturn-json breaks-daily-keys breaks-output-replace \
         alert-upturn alert-upturn-json alert-since-suppress alert-since-all \
         alert-since-keep alert-output-flagged; do
  cmp -s "$work/upturn.csv" "$cli/$c/input.csv" ||
    { echo "FAIL: $c/input.csv is not the generator's upturn.csv"; status=1; }
done
[ $status -eq 0 ] && echo "ok: command-test inputs match the generator"
exit $status
