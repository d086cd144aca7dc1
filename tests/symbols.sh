#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The shared library exports exactly the symbols listed in tests/symbols.txt
# (all twofold_*), compared with nm -D.
set -eu
lib="$top_builddir/lib/.libs/libtwofold.so"
if [ ! -f "$lib" ]; then
  echo "FAIL: $lib not built (configure with --enable-shared)" >&2
  exit 1
fi
actual=$(nm -D --defined-only "$lib" | awk '$2 ~ /^[TDBRVW]$/ {print $3}' | sed 's/@.*//' | LC_ALL=C sort -u)
expected=$(grep -v '^#' "$top_srcdir/tests/symbols.txt" | LC_ALL=C sort -u)
bad=$(printf '%s\n' "$actual" | grep -v '^twofold_' || true)
if [ -n "$bad" ]; then
  echo "FAIL: symbols outside the twofold_ namespace are exported:" >&2
  printf '%s\n' "$bad" >&2
  exit 1
fi
if [ "$actual" != "$expected" ]; then
  echo "FAIL: exported symbols differ from tests/symbols.txt (< expected, > actual):" >&2
  diff <(printf '%s\n' "$expected") <(printf '%s\n' "$actual") >&2 || true
  exit 1
fi
echo "symbols: $(printf '%s\n' "$actual" | wc -l) exported, all listed"
