#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The bad-input catalogue (tests/bad-inputs/MANIFEST) through the twofold
# command.  For every file: the command exits 3 (twofold(1): "unreadable or
# malformed input"), its message names the file and, where the manifest
# gives one, the line ("FILE:LINE:"), and quotes the offending value; with
# --output it creates no file and leaves no temporary file behind, and an
# existing output file stays exactly as it was.  TWOFOLD_TEST_WRAPPER
# (e.g. valgrind, see make check-valgrind) prefixes each command;
# TWOFOLD_BAD_INPUTS_ONCE=1 (used with valgrind, to save time) leaves out
# the second run over an existing output file.
set -u
: "${top_srcdir:?}" "${top_builddir:?}"
prog="$top_builddir/bindings/cli/twofold"
dir="$top_srcdir/tests/bad-inputs"
[ -x "$prog" ] || { echo "FAIL: $prog not built" >&2; exit 1; }
work=$(mktemp -d "${TMPDIR:-/tmp}/twofold-bad.XXXXXX") || exit 1
trap 'rm -rf "$work"' EXIT
LC_ALL=C
export LC_ALL

pass=0
fail=0
# Tabs become the unit separator first: read would merge empty fields
# between tabs (tab is IFS white space).
while IFS=$'\037' read -r file status line fragment what; do
  case "$file" in ''|'#'*) continue ;; esac
  why=""
  rm -rf "$work/run" && mkdir "$work/run"
  cp "$dir/$file" "$work/run/$file"
  # 1. no output file yet
  (cd "$work/run" && ${TWOFOLD_TEST_WRAPPER:-} "$prog" --output result.tsv --format tsv "$file" >out 2>err)
  st=$?
  if [ "$st" -ne 3 ]; then
    why="exit status $st, expected 3"
  elif [ "$line" -gt 0 ] && ! grep -qF "$file:$line:" "$work/run/err"; then
    why="message does not name $file:$line:"
  elif ! grep -qF "$file" "$work/run/err"; then
    why="message does not name the file"
  elif [ -n "$fragment" ] && ! grep -qF -- "$fragment" "$work/run/err"; then
    why="message does not quote '$fragment'"
  elif [ -e "$work/run/result.tsv" ]; then
    why="a partial output file was left"
  elif [ "$(ls -A "$work/run" | LC_ALL=C sort | tr '\n' ' ')" != "$(printf '%s\n' err "$file" out | LC_ALL=C sort | tr '\n' ' ')" ]; then
    why="stray files left: $(ls -A "$work/run" | tr '\n' ' ')"
  elif [ "${TWOFOLD_BAD_INPUTS_ONCE:-0}" != 1 ]; then
    # 2. an existing output file is not touched
    printf 'earlier result\n' >"$work/run/result.tsv"
    touch -d '2001-02-03 04:05:06' "$work/run/result.tsv"
    before=$(stat -c '%s %Y %i' "$work/run/result.tsv")
    (cd "$work/run" && ${TWOFOLD_TEST_WRAPPER:-} "$prog" --output result.tsv --format tsv "$file" >out 2>err)
    st=$?
    after=$(stat -c '%s %Y %i' "$work/run/result.tsv")
    if [ "$st" -ne 3 ]; then
      why="second run: exit status $st, expected 3"
    elif [ "$before" != "$after" ] || [ "$(cat "$work/run/result.tsv")" != "earlier result" ]; then
      why="the existing output file was changed on failure"
    fi
  fi
  if [ -n "$why" ]; then
    echo "FAIL: $file ($what): $why"
    sed 's/^/    /' "$work/run/err" | head -5
    fail=$((fail + 1))
  else
    pass=$((pass + 1))
  fi
done < <(tr '\t' '\037' <"$dir/MANIFEST")
echo "bad inputs through twofold: $pass passed, $fail failed"
[ "$pass" -ge 40 ] || { echo "FAIL: fewer than 40 cases ran" >&2; exit 1; }
[ "$fail" -eq 0 ]
