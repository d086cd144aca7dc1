#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# The R package: R CMD build, then R CMD check against this build tree's
# library.  The check runs the package's tests (bindings/R/tests: growth
# rate and Wald interval against stats::glm and MASS::glm.nb) and its
# examples.  Fails on any ERROR or WARNING; NOTEs are printed (see
# README.md for the expected ones).  MASS (r-cran-mass)
# missing is a failure.
set -u
if [ -n "${TWOFOLD_SKIP_BINDINGS:-}" ]; then
  # The sanitizer build's library needs the ASan runtime loaded first, which
  # an outside interpreter or program does not do; the normal build runs it.
  echo "*** SKIPPED under sanitizers (TWOFOLD_SKIP_BINDINGS=1): $(basename "$0") runs in the normal build ***"
  exit 77
fi
: "${top_srcdir:?}" "${top_builddir:?}"
tmp=$(mktemp -d "${TMPDIR:-/tmp}/twofold-r.XXXXXX")
trap 'rm -rf "$tmp"' EXIT
. "$top_srcdir/tests/r-env.sh"
"$R_BIN" --vanilla --slave -e 'if (!requireNamespace("MASS", quietly = TRUE)) quit(status = 1)' ||
  r_env_fail "R package MASS not installed (Debian r-cran-mass)"
cd "$tmp" || exit 1
"$R_BIN" CMD build --no-build-vignettes --no-manual src/twofold >build.log 2>&1 || {
  cat build.log >&2; r_env_fail "R CMD build failed"; }
tarball=$(ls twofold_*.tar.gz)
export _R_CHECK_FORCE_SUGGESTS_=false
"$R_BIN" CMD check --no-manual --no-build-vignettes "$tarball" >check.out 2>&1
rc=$?
cat check.out
log=twofold.Rcheck/00check.log
if [ -f twofold.Rcheck/tests/reference.Rout ]; then
  echo "--- reference agreement (twofold.Rcheck/tests/reference.Rout):"
  grep 'rel.diff' twofold.Rcheck/tests/reference.Rout
fi
for f in twofold.Rcheck/tests/*.Rout.fail; do
  [ -f "$f" ] && { echo "--- $f:"; tail -40 "$f"; }
done
[ -f twofold.Rcheck/00install.out ] && [ "$rc" -ne 0 ] && tail -30 twofold.Rcheck/00install.out
status=$(grep '^Status:' "$log" 2>/dev/null)
echo "R CMD check: ${status:-no status line}"
if [ "$rc" -ne 0 ] || [ -z "$status" ]; then
  r_env_fail "R CMD check failed (exit $rc)"
fi
case "$status" in
  *ERROR*|*WARNING*) r_env_fail "R CMD check: $status" ;;
esac
exit 0
