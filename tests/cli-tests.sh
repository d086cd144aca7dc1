#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Command-level tests as data.  Each folder tests/cli/CASE/ holds:
#   cmd              the command line: a program name (twofold, ...) and its
#                    arguments, shell-quoted on one line.  $DEMO names
#                    examples/demo.csv; the command runs in a scratch folder
#                    holding copies of the case's files, so "input.csv" is
#                    the case's input.
#   stdin            (optional) fed to standard input; else /dev/null
#   expected         (optional) standard output, byte for byte
#   expected-stderr  (optional) standard error, byte for byte
#   expected-status  (optional) exit status; 0 if absent
#   check            (optional) a bash script run afterwards in the scratch
#                    folder (with out, err and status files there, and
#                    $CASE, $PROGRAM_DIR, $PYTHON3, $top_srcdir set); the
#                    case fails unless it exits 0
#   README           what the case checks and where its expectations come
#                    from
# A case that names no expectation at all is an error, not a pass.
# Usage: tests/cli-tests.sh [CASE...]   (default: every case)
# TWOFOLD_TEST_WRAPPER, if set, prefixes each command (make check-valgrind).
set -u
: "${top_srcdir:?}" "${top_builddir:?}"
PYTHON3=${PYTHON3:-/usr/bin/python3}
PROGRAM_DIR=$top_builddir/bindings/cli
DEMO=$top_srcdir/examples/demo.csv
export PYTHON3 PROGRAM_DIR DEMO top_srcdir top_builddir
LC_ALL=C
export LC_ALL

cases_dir=$top_srcdir/tests/cli
work_root=$(mktemp -d "${TMPDIR:-/tmp}/twofold-cli.XXXXXX") || exit 99
trap 'rm -rf "$work_root"' EXIT

if [ $# -gt 0 ]; then
  cases=("$@")
else
  cases=()
  for d in "$cases_dir"/*/; do
    cases+=("$(basename "$d")")
  done
fi
if [ ${#cases[@]} -eq 0 ]; then
  echo "FAIL: no cases in $cases_dir" >&2
  exit 1
fi

fail=0
pass=0
for name in "${cases[@]}"; do
  CASE=$cases_dir/$name
  export CASE
  work=$work_root/$name
  mkdir -p "$work"
  why=""
  if [ ! -f "$CASE/cmd" ]; then
    why="no cmd file"
  elif [ ! -f "$CASE/expected" ] && [ ! -f "$CASE/expected-stderr" ] &&
       [ ! -f "$CASE/expected-status" ] && [ ! -f "$CASE/check" ]; then
    why="no expectation (expected, expected-stderr, expected-status or check)"
  fi
  if [ -z "$why" ]; then
    for f in "$CASE"/*; do
      case $(basename "$f") in
        cmd|expected|expected-stderr|expected-status|check|README) ;;
        *) cp -p "$f" "$work/" ;;
      esac
    done
    # The first word names the program; the rest are its arguments.
    eval "set -- $(cat "$CASE/cmd")"
    prog=$1
    shift
    if [ ! -x "$PROGRAM_DIR/$prog" ]; then
      why="program $PROGRAM_DIR/$prog not built"
    else
      stdin=/dev/null
      [ -f "$CASE/stdin" ] && stdin=$CASE/stdin
      (cd "$work" && ${TWOFOLD_TEST_WRAPPER:-} "$PROGRAM_DIR/$prog" "$@" <"$stdin" >out 2>err)
      status=$?
      echo "$status" >"$work/status"
      want=0
      [ -f "$CASE/expected-status" ] && want=$(tr -d ' \n' <"$CASE/expected-status")
      if [ "$status" != "$want" ]; then
        why="exit status $status, expected $want"
      elif [ -f "$CASE/expected" ] && ! cmp -s "$CASE/expected" "$work/out"; then
        why="standard output differs:
$(diff -u "$CASE/expected" "$work/out" | head -40)"
      elif [ -f "$CASE/expected-stderr" ] && ! cmp -s "$CASE/expected-stderr" "$work/err"; then
        why="standard error differs:
$(diff -u "$CASE/expected-stderr" "$work/err" | head -40)"
      elif [ -f "$CASE/check" ]; then
        if ! chk=$(cd "$work" && bash "$CASE/check" 2>&1); then
          why="check failed:
$chk"
        fi
      fi
    fi
  fi
  if [ -n "$why" ]; then
    echo "FAIL: $name: $why"
    if [ -s "$work/err" ]; then
      echo "  stderr was:"
      sed 's/^/    /' "$work/err" | head -20
    fi
    fail=$((fail + 1))
  else
    echo "ok: $name"
    pass=$((pass + 1))
  fi
done
echo "$pass passed, $fail failed"
[ "$fail" -eq 0 ]
