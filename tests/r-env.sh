# SPDX-License-Identifier: GPL-3.0-or-later
# Sourced by tests/r-bindings.sh and tests/doc-examples.sh: makes the R
# package build against the library of this build tree.  pkg-config finds a
# generated twofold.pc (include/ of the source tree, lib/.libs of the build
# tree, with an rpath), and LD_LIBRARY_PATH puts the build tree's library
# before an installed one.  Needs $top_srcdir, $top_builddir and a scratch
# directory $tmp; exports R_BIN, PKG_CONFIG_PATH, LD_LIBRARY_PATH.
r_env_fail() { echo "FAIL: $*" >&2; exit 1; }
R_BIN=$(command -v R) || r_env_fail "R not found (Debian r-base-core, r-base-dev)"
command -v pkg-config >/dev/null || r_env_fail "pkg-config not found"
libdir="$top_builddir/lib/.libs"
[ -f "$libdir/libtwofold.so" ] || r_env_fail "$libdir/libtwofold.so not built"
version=$(sed -n 's/^#define TWOFOLD_VERSION_STRING "\(.*\)"$/\1/p' \
  "$top_srcdir/include/twofold.h")
mkdir -p "$tmp/pkgconfig"
cat >"$tmp/pkgconfig/twofold.pc" <<PC
Name: twofold
Description: libtwofold in the build tree $top_builddir
Version: $version
Libs: -L$libdir -Wl,-rpath,$libdir -ltwofold
Cflags: -I$top_srcdir/include
PC
export PKG_CONFIG_PATH="$tmp/pkgconfig${PKG_CONFIG_PATH:+:$PKG_CONFIG_PATH}"
export LD_LIBRARY_PATH="$libdir${LD_LIBRARY_PATH:+:$LD_LIBRARY_PATH}"
# Keep R away from the user's library and profile.
# An empty local package repository: R CMD check's dependency check reads
# it instead of the network.
mkdir -p "$tmp/repo/src/contrib"
: >"$tmp/repo/src/contrib/PACKAGES"
printf 'options(repos = c(LOCAL = "file://%s/repo"))\n' "$tmp" >"$tmp/Rprofile"
export R_LIBS_USER="$tmp/nolib" R_ENVIRON_USER="$tmp/none" R_PROFILE_USER="$tmp/Rprofile"
# A writable copy of the package sources (the source tree may be read-only).
rm -rf "$tmp/src"
mkdir -p "$tmp/src"
cp -R "$top_srcdir/bindings/R" "$tmp/src/twofold"
