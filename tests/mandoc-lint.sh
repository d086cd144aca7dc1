#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# Every man page is clean under mandoc -Tlint (style messages excepted).
set -eu
if [ -z "${MANDOC:-}" ] || [ ! -x "$MANDOC" ]; then
  echo "FAIL: mandoc not found; install Debian's mandoc (tools/setup does)" >&2
  exit 1
fi
status=0
for page in "$top_srcdir"/man/*.[0-9]; do
  out=$("$MANDOC" -Tlint -W warning "$page" 2>&1 || true)
  if [ -n "$out" ]; then
    echo "FAIL: $page" >&2
    printf '%s\n' "$out" >&2
    status=1
  else
    echo "ok: $(basename "$page")"
  fi
done
exit $status
