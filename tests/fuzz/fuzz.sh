#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Build the libFuzzer harnesses with clang and run them (make fuzz, make
# fuzz-smoke).  The library's C sources are compiled into each harness with
# -fsanitize=fuzzer,address,undefined; the normal build (gcc) is untouched.
#
#   fuzz.sh SECONDS      build, then run each harness for SECONDS
#
# Environment (set by the Makefile): FUZZ_CC (clang), srcdir, builddir,
# LIB_SOURCES (the library's sources, relative to srcdir), FUZZ_CPPFLAGS
# (GSL and zlib include flags), FUZZ_LIBS (GSL and zlib libraries),
# FUZZ_HARNESSES (names under tests/fuzz/, without .c), FUZZ_DIR (work
# directory: objects, growing corpora, crash artifacts, logs).
#
# Inputs: the committed seed corpus tests/fuzz/corpus/<harness>/ and the
# regression inputs tests/fuzz/regressions/<harness>/ (both read-only
# here); new inputs go to $FUZZ_DIR/corpus/<harness>/.  A crash, leak,
# timeout or out-of-memory is left in $FUZZ_DIR/artifacts/<harness>/ and
# fails the run: fix it, then copy the input into
# tests/fuzz/regressions/<harness>/ so that make check replays it.
set -u
secs=${1:?usage: fuzz.sh SECONDS}
: "${FUZZ_CC:=clang}" "${srcdir:=.}" "${builddir:=.}"
: "${FUZZ_HARNESSES:=fuzz-read fuzz-fit}" "${FUZZ_DIR:=$builddir/build-fuzz}"
: "${LIB_SOURCES:?LIB_SOURCES not set}"

if ! command -v "$FUZZ_CC" >/dev/null 2>&1; then
  echo "FAIL: $FUZZ_CC not found (Debian: clang and libclang-rt-14-dev; tools/setup installs them)" >&2
  exit 1
fi

san="-fsanitize=address,undefined -fno-sanitize-recover=all"
cflags="-std=c11 -g -O1 -fno-omit-frame-pointer $san"
cppflags="-DTWOFOLD_BUILDING -D_POSIX_C_SOURCE=200809L -I$builddir -I$srcdir/include -I$srcdir/lib ${FUZZ_CPPFLAGS:-}"
mkdir -p "$FUZZ_DIR/obj" || exit 1

# The library, once for all harnesses.
objs=""
for src in $LIB_SOURCES; do
  case "$src" in *.c) ;; *) continue ;; esac
  obj="$FUZZ_DIR/obj/$(basename "$src" .c).o"
  # shellcheck disable=SC2086
  "$FUZZ_CC" $cflags -fsanitize=fuzzer-no-link $cppflags -c "$srcdir/$src" -o "$obj" || {
    echo "FAIL: could not compile $src with $FUZZ_CC" >&2; exit 1; }
  objs="$objs $obj"
done

status=0
summary="$FUZZ_DIR/summary.txt"
: > "$summary"
for h in $FUZZ_HARNESSES; do
  case "$h" in
    fuzz-read) max_len=16384 ;;
    fuzz-fit) max_len=8192 ;;
    *) max_len=8192 ;;
  esac
  # shellcheck disable=SC2086
  "$FUZZ_CC" $cflags -fsanitize=fuzzer $cppflags -I"$srcdir/tests/fuzz" \
    "$srcdir/tests/fuzz/$h.c" $objs ${FUZZ_LIBS:-} -lm -o "$FUZZ_DIR/$h" || {
    echo "FAIL: could not build $h" >&2; exit 1; }
  work="$FUZZ_DIR/corpus/$h"
  art="$FUZZ_DIR/artifacts/$h"
  mkdir -p "$work" "$art"
  dict=""
  [ -f "$srcdir/tests/fuzz/$h.dict" ] && dict="-dict=$srcdir/tests/fuzz/$h.dict"
  log="$FUZZ_DIR/$h.log"
  echo "fuzz: $h for ${secs}s (max_len $max_len; log $log)"
  # shellcheck disable=SC2086
  ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1} \
  UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1} \
    "$FUZZ_DIR/$h" -max_len="$max_len" -max_total_time="$secs" -timeout=20 \
    -rss_limit_mb=2048 -print_final_stats=1 -artifact_prefix="$art/" $dict \
    "$work" "$srcdir/tests/fuzz/corpus/$h" "$srcdir/tests/fuzz/regressions/$h" \
    > "$log" 2>&1
  rc=$?
  execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)
  rate=$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -n 1)
  cov=$(grep -o 'cov: [0-9]*' "$log" | tail -n 1)
  line="fuzz: $h: ${execs:-?} executions in ${secs}s (${rate:-?}/s), ${cov:-cov: ?}, corpus $(find "$work" -type f | wc -l) files, exit $rc"
  echo "$line" | tee -a "$summary"
  if [ "$rc" -ne 0 ]; then
    status=1
    echo "FAIL: $h found a problem; the end of its log:" >&2
    tail -n 40 "$log" >&2
    echo "artifacts in $art:" >&2
    ls -l "$art" >&2
    echo "Fix it, then copy the input to tests/fuzz/regressions/$h/ (make check replays it)." >&2
  fi
done
exit $status
