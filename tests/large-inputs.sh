#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Large and hostile input through the twofold command: bounded memory or a
# clear error, never a hang.  Each input is generated on the fly (nothing
# large is committed) and read under timeout(1) and GNU time (/usr/bin/time
# -v, Debian's "time" package) for wall time and peak resident memory.
#   1. 10^7 rows (1000 regions x 10^4 days), gzip-compressed: read whole.
#   2. a gzip bomb: 1 GiB of commas after a header, from 1024 concatenated
#      gzip members of 1 MiB each (RFC 1952 allows several members): the
#      record-size limit stops it with a clear error.
#   3. a gzip bomb of 1 GiB of zero bytes: stopped at the first NUL.
#   4. one line of 100 MB: the record-size limit stops it.
#   5. one region with 10^6 consecutive days: read whole.
# The memory bounds asserted are generous multiples of the data held
# (12 bytes per region-day: a double and a line number; common practice,
# no source); the figures print either way.
set -u
: "${top_srcdir:?}" "${top_builddir:?}"
prog="$top_builddir/bindings/cli/twofold"
TIME=/usr/bin/time
LIMIT=${TWOFOLD_LARGE_TIMEOUT:-120}
if [ ! -x "$prog" ]; then
  echo "FAIL: $prog not built" >&2
  exit 1
fi
if [ ! -x "$TIME" ]; then
  echo "FAIL: $TIME not found (Debian package 'time'; tools/setup installs it)" >&2
  exit 1
fi
work=$(mktemp -d "${TMPDIR:-/tmp}/twofold-large.XXXXXX") || exit 1
trap 'rm -rf "$work"' EXIT
# The libtool wrapper would be what time measures; run the real program.
run_prog=$prog
[ -x "$top_builddir/bindings/cli/.libs/twofold" ] && run_prog="$top_builddir/bindings/cli/.libs/twofold"
export LD_LIBRARY_PATH="$top_builddir/lib/.libs${LD_LIBRARY_PATH:+:$LD_LIBRARY_PATH}"

fail=0
# run NAME MAX_RSS_MB EXPECTED_STATUS MESSAGE_REGEX FILE
run() {
  local name=$1 max_mb=$2 want=$3 regex=$4 file=$5
  timeout -k 5 "$LIMIT" "$TIME" -v -o "$work/time" \
    ${TWOFOLD_TEST_WRAPPER:-} "$run_prog" --summary --format tsv "$file" \
    >"$work/out" 2>"$work/err"
  local st=$?
  local rss wall
  rss=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$work/time")
  wall=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$work/time")
  local mb=$(( ${rss:-0} / 1024 ))
  printf 'large: %-28s status %s, wall %s, peak RSS %s MB\n' "$name" "$st" "${wall:-?}" "$mb"
  if [ "$st" -eq 124 ] || [ "$st" -eq 137 ]; then
    echo "FAIL: $name: no result within ${LIMIT}s" >&2; fail=1; return
  fi
  if [ "$st" -ne "$want" ]; then
    echo "FAIL: $name: exit status $st, expected $want" >&2
    head -c 600 "$work/err" >&2; fail=1; return
  fi
  if [ -n "$regex" ] && ! grep -Eq "$regex" "$work/err"; then
    echo "FAIL: $name: message does not match /$regex/:" >&2
    head -c 600 "$work/err" >&2; fail=1; return
  fi
  if [ "$mb" -gt "$max_mb" ]; then
    echo "FAIL: $name: peak RSS $mb MB above the bound $max_mb MB" >&2; fail=1
  fi
  [ -s "$work/err" ] && sed 's/^/  stderr: /' "$work/err" | head -c 300 && echo
}

# 1. 10^7 rows: dates of 10^4 days from 1990-01-01 (awk's own calendar).
awk 'BEGIN {
  split("31 28 31 30 31 30 31 31 30 31 30 31", ml, " ");
  y = 1990; m = 1; d = 1;
  for (t = 0; t < 10000; t++) {
    date[t] = sprintf("%04d-%02d-%02d", y, m, d);
    leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    if (++d > ml[m] + (m == 2 && leap)) { d = 1; if (++m > 12) { m = 1; y++ } }
  }
  print "region,date,cases";
  for (r = 0; r < 1000; r++) for (t = 0; t < 10000; t++)
    printf "Region %d,%s,%d\n", r, date[t], (r * 7 + t * 13) % 97;
}' | gzip -1 >"$work/rows.csv.gz"
# 10^7 region-days x 12 bytes = 120 MB held; bound 600 MB.
run "10^7 rows (gzip)" 600 0 "" "$work/rows.csv.gz"
if [ "$fail" -eq 0 ]; then
  n=$(awk -F'\t' 'NR > 1 && $1 ~ /^Region / {k++} END {print k + 0}' "$work/out")
  [ "$n" -eq 1000 ] || { echo "FAIL: 10^7 rows: $n regions in the summary, expected 1000" >&2; fail=1; }
fi
rm -f "$work/rows.csv.gz"

# 2. and 3. gzip bombs from 1024 members of 1 MiB each.
printf 'region,date,cases\n' | gzip -9 >"$work/commas.gz"
head -c 1048576 /dev/zero | tr '\0' ',' | gzip -9 >"$work/m.gz"
for i in $(seq 1024); do cat "$work/m.gz"; done >>"$work/commas.gz"
head -c 1048576 /dev/zero | gzip -9 >"$work/m.gz"
for i in $(seq 1024); do cat "$work/m.gz"; done >"$work/zeros.gz"
echo "large: bombs are $(stat -c %s "$work/commas.gz") and $(stat -c %s "$work/zeros.gz") bytes, 1 GiB each uncompressed"
run "gzip bomb: 1 GiB of commas" 300 3 "commas.gz:2" "$work/commas.gz"
run "gzip bomb: 1 GiB of NUL" 100 3 "zeros.gz:1" "$work/zeros.gz"
rm -f "$work/commas.gz" "$work/zeros.gz" "$work/m.gz"

# 4. one line of 100 MB (a region name).
{ printf 'region,date,cases\n'; head -c 100000000 /dev/zero | tr '\0' 'a'; printf ',2020-01-01,1\n'; } >"$work/line.csv"
run "one line of 100 MB" 300 3 "line.csv:2" "$work/line.csv"
rm -f "$work/line.csv"

# 5. 10^6 days in one region, from 0800-01-01.
awk 'BEGIN {
  split("31 28 31 30 31 30 31 31 30 31 30 31", ml, " ");
  y = 800; m = 1; d = 1; print "region,date,cases";
  for (t = 0; t < 1000000; t++) {
    printf "Long Reach,%04d-%02d-%02d,%d\n", y, m, d, t % 50;
    leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    if (++d > ml[m] + (m == 2 && leap)) { d = 1; if (++m > 12) { m = 1; y++ } }
  }
}' >"$work/days.csv"
run "one region, 10^6 days" 200 0 "" "$work/days.csv"
rm -f "$work/days.csv"

[ "$fail" -eq 0 ] && echo "large: all bounded, all answered"
exit $fail
