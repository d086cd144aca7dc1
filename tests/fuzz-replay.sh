#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Replay the committed fuzz corpora and every regression input (crashes the
# fuzzers found, now fixed) through the harnesses built without libFuzzer.
# Under make check-sanitize the replay programs carry ASan and UBSan.
set -u
: "${top_srcdir:?}" "${top_builddir:?}"
status=0
n=0
for prog in "$top_builddir"/tests/fuzz/replay-*; do
  case "$prog" in *.o|*.log|*.trs) continue ;; esac
  [ -x "$prog" ] || continue
  h=fuzz-${prog##*/replay-}
  dirs=()
  for d in "$top_srcdir/tests/fuzz/corpus/$h" "$top_srcdir/tests/fuzz/regressions/$h"; do
    [ -d "$d" ] && dirs+=("$d")
  done
  if [ ${#dirs[@]} -eq 0 ]; then
    echo "FAIL: no corpus or regressions for $h" >&2
    status=1
    continue
  fi
  echo "replaying $h: ${dirs[*]}"
  if ! "$prog" "${dirs[@]}"; then
    echo "FAIL: $h: an input broke a promise or crashed (see above)" >&2
    status=1
  fi
  n=$((n + 1))
done
if [ "$n" -eq 0 ]; then
  echo "FAIL: no replay programs built" >&2
  exit 1
fi
exit $status
