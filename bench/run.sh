#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
#
# bench/run.sh - the benchmarks of twofold; `make bench` runs it.
#
#   run.sh BUILDDIR DATADIR [EXTRA_PROGRAM ...]
#
# BUILDDIR is the build tree (with bench/bench-read, bench/bench-roll,
# bench/bench-cp, bindings/cli/twofold and, if built,
# bindings/cli/twofold-breaks); DATADIR holds bench.csv and bench.csv.gz
# made by bench/make-bench-data.  Each EXTRA_PROGRAM (a module's own
# benchmark) is run and its output shown as it is.
#
# Prints figures and a summary table; never fails because of a timing (the
# exit status is non-zero only when a program fails to run).  See
# bench/README.md for what each figure means.
set -u -o pipefail
LC_ALL=C
export LC_ALL

builddir=${1:?usage: run.sh BUILDDIR DATADIR [EXTRA_PROGRAM ...]}
datadir=${2:?usage: run.sh BUILDDIR DATADIR [EXTRA_PROGRAM ...]}
shift 2
gz=$datadir/bench.csv.gz
plain=$datadir/bench.csv
results=$(mktemp "${TMPDIR:-/tmp}/twofold-bench.XXXXXX") || exit 1
trap 'rm -f "$results" "$results".*' EXIT
status=0

TIME=/usr/bin/time
if [ ! -x "$TIME" ]; then
  echo "run.sh: $TIME (Debian package 'time') is absent: peak memory of the commands is not measured" >&2
  TIME=
fi

get() { awk -F'\t' -v k="$1" '$1 == "result" && $2 == k {v = $3} END {print v}' "$results.raw"; }
: >"$results.raw"
note() { printf '\n== %s\n' "$*"; }
# Keep the "result" lines of a program's output; show the rest.
collect() { tee -a "$results.raw" | { grep -v '^result	' || true; }; }

load_before=$(uptime)
note "machine: $(nproc) cores; load at start: ${load_before#*load average: }"
echo "data: $(ls -l "$gz" | awk '{printf "%s (%.0f MB)", $NF, $5/1e6}'), $(ls -l "$plain" | awk '{printf "%s (%.0f MB)", $NF, $5/1e6}')"

note "reading (twofold_read_file)"
"$builddir/bench/bench-read" gzip="$gz" plain="$plain" | collect || status=1

note "rolling growth fits (twofold_growth_roll, one thread)"
"$builddir/bench/bench-roll" --seconds 2 | collect || status=1

# A command under /usr/bin/time -v: wall, user+sys and peak memory.
run_timed() { # key outfile command...
  local key=$1 out=$2
  shift 2
  local tv=$results.$key.time
  local w0 w1 rc
  w0=$(date +%s.%N)
  if [ -n "$TIME" ]; then
    "$TIME" -v -o "$tv" "$@" >"$out" 2>"$results.$key.err"
    rc=$?
  else
    "$@" >"$out" 2>"$results.$key.err"
    rc=$?
  fi
  w1=$(date +%s.%N)
  if [ $rc -ne 0 ]; then
    echo "$key: exit status $rc:"
    sed 's/^/  /' "$results.$key.err" | head -20
    status=1
    return 1
  fi
  printf 'result\t%s.wall_s\t%s\n' "$key" "$(awk -v a="$w0" -v b="$w1" 'BEGIN {printf "%.3f", b - a}')" >>"$results.raw"
  if [ -n "$TIME" ]; then
    awk -v k="$key" -F': ' '
      /User time/ {u=$2} /System time/ {s=$2}
      /Maximum resident set size/ {m=$2}
      END {printf "result\t%s.cpu_s\t%.3f\nresult\t%s.peak_mb\t%.1f\n", k, u+s, k, m/1024}' \
      "$tv" >>"$results.raw"
  fi
  grep "^result	$key\." "$results.raw" | awk -F'\t' '{printf "%s %s  ", $2, $3} END {print ""}'
  echo "  output: $(wc -l <"$out") lines"
}

twofold=$builddir/bindings/cli/twofold
note "twofold command: latest estimate per region, $gz"
if "$twofold" --version >/dev/null 2>&1; then
  run_timed twofold "$datadir/twofold.out" "$twofold" --format=tsv "$gz"
else
  echo "twofold: not built; SKIPPED"
fi

note "changepoints (library, one thread)"
for part in offline online prune; do
  opt=
  # the kink pruning check costs two kink runs; skip it when one is slow
  if [ $part = prune ] && awk -v ms="$(get offline.kink.cpu_ms)" \
    'BEGIN {exit !(ms + 0 > 1000)}'; then
    opt=--no-kink
    echo "pruning kink  SKIPPED: one kink run takes $(get offline.kink.cpu_ms) ms CPU"
  fi
  "$builddir/bench/bench-cp" --seconds 2 --part $part $opt | collect ||
    { echo "bench-cp --part $part: FAILED (exit status $?)"; status=1; }
done

breaks=$builddir/bindings/cli/twofold-breaks
note "twofold-breaks on every region, 2 threads, $gz"
if "$breaks" --version >/dev/null 2>&1; then
  threads=
  if "$breaks" --help 2>&1 | grep -q -- '--threads'; then
    threads=--threads=2
  fi
  # The whole file when the offline figure says it fits in about four
  # minutes; else the first K districts only (about 20 CPU seconds), and
  # the times for all 10,000 and their total extrapolated in proportion
  # to the series analysed (K districts and their total).
  ms=$(get offline.kink.cpu_ms)
  k=$(awk -v ms="${ms:-0}" 'BEGIN {
    if (ms * 10001 / 2 / 1000 <= 240) print 0;
    else { k = int(20 * 1000 / ms); print (k < 2 ? 2 : k) } }')
  if [ "$k" -eq 0 ]; then
    run_timed breaks "$datadir/breaks.out" "$breaks" $threads --format=tsv "$gz"
  else
    sub=$datadir/bench-first$k.csv.gz
    awk -F, -v k="$k" 'NR == 1 || (substr($1, 10) + 0 <= k)' "$plain" |
      gzip -n -c >"$sub"
    echo "The offline kink figure (${ms} ms per series) predicts hours for"
    echo "all 10,000 districts: running the first $k districts only ($sub)."
    if run_timed breaks_sub "$datadir/breaks.out" "$breaks" $threads --format=tsv "$sub"; then
      awk -F'\t' -v k="$k" '$1 == "result" && $2 == "breaks_sub.wall_s" {
          printf "result\tbreaks.extrapolated_wall_s\t%.1f\n", $3 * 10001 / (k + 1) }
        $1 == "result" && $2 == "breaks_sub.cpu_s" {
          printf "result\tbreaks.extrapolated_cpu_s\t%.1f\n", $3 * 10001 / (k + 1) }' \
        "$results.raw" >>"$results.raw.x"
      cat "$results.raw.x" >>"$results.raw"
      echo "breaks_sub_regions=$k" >"$results.k"
    fi
  fi
else
  echo "twofold-breaks: not built; SKIPPED"
fi

for p in "$@"; do
  note "module benchmark $p"
  "$p" || status=1
done

load_after=$(uptime)

# figure | measured | CPU time | target | met
row() { # label value unit cpu target-op target-value
  local label=$1 value=$2 unit=$3 cpu=$4 op=$5 target=$6 met
  if [ -z "$value" ]; then
    printf '| %-50s | %-20s | %-12s | %-12s | %-4s |\n' "$label" "not measured" "" "$op $target" "-"
    return
  fi
  case $op in
    ">=") met=$(awk -v v="$value" -v t="$target" 'BEGIN {print (v >= t) ? "yes" : "no"}') ;;
    "<=") met=$(awk -v v="$value" -v t="$target" 'BEGIN {print (v <= t) ? "yes" : "no"}') ;;
    "<") met=$(awk -v v="$value" -v t="$target" 'BEGIN {print (v < t) ? "yes" : "no"}') ;;
    *) met="-" ;;
  esac
  printf '| %-50s | %-20s | %-12s | %-12s | %-4s |\n' "$label" \
    "$(awk -v v="$value" -v u="$unit" 'BEGIN {printf (v >= 1e5 ? "%.3g %s" : "%.4g %s"), v, u}')" \
    "$cpu" "$op $target" "$met"
}
cpu_of() { local v; v=$(get "$1"); [ -n "$v" ] && printf '%.2f s' "$v"; }

note "summary (load at start: ${load_before#*load average: }; at end: ${load_after#*load average: })"
printf '| %-50s | %-20s | %-12s | %-12s | %-4s |\n' "figure" "measured" "CPU time" "target" "met"
printf '|%s|%s|%s|%s|%s|\n' "----------------------------------------------------" "----------------------" "--------------" "--------------" "------"
row "read gzip, rows/s (wall)" "$(get gzip.rows_per_s)" "rows/s" "$(cpu_of gzip.cpu_s)" "" ""
row "read plain CSV, rows/s (wall)" "$(get plain.rows_per_s)" "rows/s" "$(cpu_of plain.cpu_s)" "" ""
row "rolling Poisson w=21, windows/s per core" "$(get poisson.windows_per_cpu_s)" "/s" "$(cpu_of poisson.cpu_s)" ">=" 5e6
row "rolling NB w=21, windows/s per core" "$(get negbin.windows_per_cpu_s)" "/s" "$(cpu_of negbin.cpu_s)" ">=" 2e5
row "twofold, whole file, wall" "$(get twofold.wall_s)" "s" "$(cpu_of twofold.cpu_s)" "<" 3
row "twofold, peak memory" "$(get twofold.peak_mb)" "MB" "" "<" 200
row "offline posterior, 730 days (kink), CPU" "$(get offline.kink.cpu_ms)" "ms" "" "<=" 10
row "offline posterior, 730 days (jump), CPU" "$(get offline.jump.cpu_ms)" "ms" "" "<=" 10
row "offline posterior, 730 days (level), CPU" "$(get offline.level.cpu_ms)" "ms" "" "<=" 10
if [ -n "$(get breaks.extrapolated_wall_s)" ]; then
  k=$(sed -n 's/^breaks_sub_regions=//p' "$results.k")
  row "twofold-breaks, 10,000 regions (from $k), 2 threads" "$(get breaks.extrapolated_wall_s)" "s" "$(cpu_of breaks.extrapolated_cpu_s)" "<=" 120
  row "twofold-breaks, peak memory ($k regions)" "$(get breaks_sub.peak_mb)" "MB" "" "" "<= 300 (all)"
else
  row "twofold-breaks, 10,000 regions, 2 threads" "$(get breaks.wall_s)" "s" "$(cpu_of breaks.cpu_s)" "<=" 120
  row "twofold-breaks, peak memory" "$(get breaks.peak_mb)" "MB" "" "<=" 300
fi
row "online update per region-day (jump), CPU" "$(get online.cpu_us)" "us" "" "<=" 20
row "pruning vs exact, max |dP(change)| (kink)" "$(get prune.kink.max_dp)" "" "" "" ""
row "pruning vs exact, max |dP(change)| (jump)" "$(get prune.jump.max_dp)" "" "" "" ""
row "pruning vs exact, max |dP(change)| (level)" "$(get prune.level.max_dp)" "" "" "" ""
echo
echo "Wall times depend on the load of the machine; CPU times less so."
exit $status
