#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# ABI check: compare the built libtwofold.so with the committed baseline
# tests/abi/libtwofold.abi (written by `make abi-baseline` with abidw from
# Debian's abigail-tools) using abidiff, and apply DEVELOPERS.md's policy:
#   - no change: pass;
#   - functions or variables added, nothing removed or changed: compatible,
#     pass; list them and remind that a release bumps CURRENT and AGE and
#     refreshes the baseline;
#   - anything removed or changed incompatibly: fail, unless the soname
#     changed and the libtool triple was bumped (CURRENT up, AGE = 0)
#     relative to tests/abi/version, as the policy requires.
# abidiff's exit status is a bit mask (libabigail manual, "abidiff"):
#   1 error, 2 usage error, 4 ABI change, 8 incompatible ABI change.
set -u
lib="$top_builddir/lib/.libs/libtwofold.so"
base="$top_srcdir/tests/abi/libtwofold.abi"
verfile="$top_srcdir/tests/abi/version"
ABIDIFF=${ABIDIFF:-abidiff}

if ! command -v "$ABIDIFF" >/dev/null 2>&1; then
  echo "FAIL: abidiff not found (install Debian's abigail-tools; tools/setup does)" >&2
  exit 1
fi
if [ ! -f "$lib" ]; then
  echo "FAIL: $lib not built (configure with --enable-shared)" >&2
  exit 1
fi
if [ ! -f "$base" ] || [ ! -f "$verfile" ]; then
  echo "FAIL: no ABI baseline; run 'make abi-baseline' and commit tests/abi/" >&2
  exit 1
fi

# The current soname and libtool triple, from the built library and from
# the libtool archive (which records what configure.ac set).
cur_soname=$(LC_ALL=C readelf -d "$lib" | sed -n 's/.*(SONAME).*\[\(.*\)\].*/\1/p')
base_soname=$(sed -n "s/.*soname='\([^']*\)'.*/\1/p" "$base" | head -n 1)
la="$top_builddir/lib/libtwofold.la"
cur_current=$(sed -n 's/^current=//p' "$la")
cur_revision=$(sed -n 's/^revision=//p' "$la")
cur_age=$(sed -n 's/^age=//p' "$la")
IFS=: read -r base_current base_revision base_age < "$verfile"
echo "abi-check: baseline soname $base_soname, version $base_current:$base_revision:$base_age"
echo "abi-check: built    soname $cur_soname, version $cur_current:$cur_revision:$cur_age"

out=$("$ABIDIFF" --no-show-locs --non-reachable-types --suppressions "$top_srcdir/tests/abi/suppressions.abignore" --hd2 "$top_srcdir/include" --drop-private-types \
  "$base" "$lib" 2>&1)
rc=$?
printf '%s\n' "$out"
if [ $((rc & 3)) -ne 0 ]; then
  echo "FAIL: abidiff could not compare (exit $rc)" >&2
  exit 1
fi
if [ "$rc" -eq 0 ]; then
  echo "abi-check: no ABI change against the baseline"
  exit 0
fi
if [ $((rc & 8)) -ne 0 ]; then
  if [ "$cur_soname" != "$base_soname" ] && [ "$cur_current" -gt "$base_current" ] &&
     [ "$cur_age" -eq 0 ]; then
    echo "abi-check: incompatible ABI change with a soname bump ($base_soname -> $cur_soname):"
    echo "abi-check: allowed by the policy; refresh the baseline with 'make abi-baseline'"
    exit 0
  fi
  echo "FAIL: incompatible ABI change (functions removed or changed) without the soname" >&2
  echo "      bump DEVELOPERS.md requires (CURRENT += 1, REVISION = 0, AGE = 0)." >&2
  exit 1
fi
# rc == 4: a change abidiff deems compatible.  The project's policy is
# stricter: a removed or changed function or variable, or a changed
# enumerator value, size or member of a public type (reachable or not:
# the status enum is used as plain int), needs the soname bump too.
# Added functions, variables and enumerators are compatible.  (abidiff 2.2
# lists some unchanged unreachable typedefs as "added"; that is noise.)
incompatible=$(printf '%s\n' "$out" | grep -E \
  -e '^(Functions|Variables) changes summary: ([1-9][0-9]* Removed|.* [1-9][0-9]* Changed)' \
  -e 'enumerator (change|deletion)' -e 'size changed' -e 'offset changed' \
  -e 'type of .* changed' -e 'data member.* (deletion|removed|change)' || true)
if [ -n "$incompatible" ]; then
  if [ "$cur_soname" != "$base_soname" ] && [ "$cur_current" -gt "$base_current" ] &&
     [ "$cur_age" -eq 0 ]; then
    echo "abi-check: interfaces changed with a soname bump ($base_soname -> $cur_soname);"
    echo "abi-check: refresh the baseline with 'make abi-baseline'"
    exit 0
  fi
  printf '%s\n' "$incompatible" >&2
  echo "FAIL: interfaces removed or changed (see above) without the soname bump" >&2
  echo "      DEVELOPERS.md requires (CURRENT += 1, REVISION = 0, AGE = 0)." >&2
  exit 1
fi
added=$(printf '%s\n' "$out" | grep -E "^ *\[A\] '(function|variable)" || true)
added_enum=$(printf '%s\n' "$out" | grep -E "enumerator insertion" -A 50 | grep -E "^ +'.*' value" || true)
if [ -z "$added" ] && [ -z "$added_enum" ]; then
  echo "abi-check: no ABI change against the baseline"
  exit 0
fi
echo "abi-check: compatible: interfaces added only:"
[ -n "$added" ] && printf '%s\n' "$added"
[ -n "$added_enum" ] && printf '%s\n' "$added_enum"
echo "abi-check: REMINDER: at release bump CURRENT and AGE (DEVELOPERS.md rule 2)"
echo "abi-check: and refresh the baseline with 'make abi-baseline'."
exit 0
