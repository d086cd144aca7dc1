#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The committed demo data (examples/demo.csv, truth.csv, segments.csv) are
# exactly what examples/make-demo writes: regenerate each into a temporary
# file and compare byte for byte.  Regenerate with `make demo-data`.
set -u
gen="$top_builddir/examples/make-demo"
if [ ! -x "$gen" ]; then
  echo "FAIL: $gen not built" >&2
  exit 1
fi
tmp=$(mktemp -d "${TMPDIR:-/tmp}/twofold-demo.XXXXXX") || exit 1
trap 'rm -rf "$tmp"' EXIT
status=0
for pair in "--cases demo.csv" "--truth truth.csv" "--segments segments.csv"; do
  set -- $pair
  if ! "$gen" "$1" "$tmp/$2"; then
    echo "FAIL: make-demo $1 failed" >&2
    status=1
    continue
  fi
  if ! cmp "$tmp/$2" "$top_srcdir/examples/$2"; then
    echo "FAIL: examples/$2 differs from make-demo $1 (run make demo-data)" >&2
    diff "$top_srcdir/examples/$2" "$tmp/$2" | head -20 >&2
    status=1
  else
    echo "ok: examples/$2 matches make-demo $1 ($(wc -l < "$tmp/$2") lines)"
  fi
done
exit $status
