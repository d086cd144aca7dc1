/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Private helpers shared by the library's modules; not installed. */
#ifndef TWOFOLD_INTERNAL_H
#define TWOFOLD_INTERNAL_H

#include "twofold.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stddef.h>
#include <string.h>

/* Largest count accepted: 2^53, the last integer a double holds exactly. */
#define TF_COUNT_MAX 9007199254740992.0

/* Size of the detailed message kept on handles. */
#define TF_ERRMSG_SIZE 512

/* Fill err (which may be NULL) with code, position and a formatted text;
 * the text is prefixed "FILE:LINE:COLUMN: " where those are known.
 * Returns code, so callers can write  return tf_error_set(...); */
int tf_error_set(twofold_error *err, int code, const char *file, long line,
                 long column, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 6, 7)))
#endif
    ;

/* Format a message into a handle's buffer (size TF_ERRMSG_SIZE). */
int tf_msg_set(char *buf, int code, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

/* strdup that returns NULL on failure (strdup is not C11). */
char *tf_strdup(const char *s);

/* log|Gamma(x)| without touching the C library's global signgam (lgamma
 * is not thread-safe; lgamma_r is the reentrant form in glibc, musl and
 * the BSDs, declared here because strict C11 headers hide it). */
double lgamma_r(double x, int *sign);
static inline double tf_lgamma(double x) {
  int sign;
  return lgamma_r(x, &sign);
}

/* Test for NaN without depending on -ffast-math semantics. */
static inline int tf_isnan(double v) { return v != v; }

/* 1 if v is NaN or a whole number in [0, 2^53] (in that range the
 * conversion to a 64-bit integer is exact for whole numbers and cuts the
 * fraction of the others; no call to floor, which baseline x86-64 makes
 * a library call). */
static inline int tf_count_ok(double v) {
  if (tf_isnan(v))
    return 1;
  return v >= 0.0 && v <= TF_COUNT_MAX && (double)(int64_t)v == v;
}

/* Two doubles in one register (GCC and Clang vector extensions), for
 * sums whose terms come in independent pairs: each lane does the same
 * operations in the same order as scalar code would, so the results are
 * the same to the bit (x86-64 adds and multiplies pairs with SSE2, which
 * every such processor has, and in ISO C mode, -std=c11, GCC forms no
 * fused multiply-add from them). */
typedef double tf_v2d __attribute__((vector_size(2 * sizeof(double))));
static inline tf_v2d tf_v2d_load(const double *p) {
  tf_v2d v;
  memcpy(&v, p, sizeof v);
  return v;
}
static inline void tf_v2d_store(double *p, tf_v2d v) {
  memcpy(p, &v, sizeof v);
}
/* p[0..1] += v */
static inline void tf_v2d_addto(double *p, tf_v2d v) {
  tf_v2d_store(p, tf_v2d_load(p) + v);
}


/* e^x in both lanes, inline: the table-driven method of Tang (1989,
 * "Table-driven implementation of the exponential function in IEEE
 * floating-point arithmetic", ACM Transactions on Mathematical Software
 * 15:144-157) with 32 entries.  x = (32 m + j) ln2/32 + r, |r| <= ln2/64,
 * e^x = 2^m 2^(j/32) e^r; k = 32 m + j the nearest integer to x 32/ln2
 * (by adding and subtracting 1.5 2^52), r = x - k L_hi - k L_lo (the
 * reduction of Cody & Waite 1980; L_hi has 38 significant bits, so
 * k L_hi is exact for |k| < 2^15), e^r - 1 by its Taylor polynomial of
 * degree 6 (remainder below (ln2/64)^7/7! < 3.5e-18 relative) and
 * 2^(j/32) rounded to double.  Error about 1 ulp (tests/check_growth_psi.c
 * measures it against expl); plain IEEE operations in a fixed order, so
 * the same on every machine.  Outside |x| <= 700, or for NaN, the C
 * library's exp. */
static const double tf_exp_tab[32] = {
    0x1.0000000000000p+0, 0x1.059b0d3158574p+0, 0x1.0b5586cf9890fp+0,
    0x1.11301d0125b51p+0, 0x1.172b83c7d517bp+0, 0x1.1d4873168b9aap+0,
    0x1.2387a6e756238p+0, 0x1.29e9df51fdee1p+0, 0x1.306fe0a31b715p+0,
    0x1.371a7373aa9cbp+0, 0x1.3dea64c123422p+0, 0x1.44e086061892dp+0,
    0x1.4bfdad5362a27p+0, 0x1.5342b569d4f82p+0, 0x1.5ab07dd485429p+0,
    0x1.6247eb03a5585p+0, 0x1.6a09e667f3bcdp+0, 0x1.71f75e8ec5f74p+0,
    0x1.7a11473eb0187p+0, 0x1.82589994cce13p+0, 0x1.8ace5422aa0dbp+0,
    0x1.93737b0cdc5e5p+0, 0x1.9c49182a3f090p+0, 0x1.a5503b23e255dp+0,
    0x1.ae89f995ad3adp+0, 0x1.b7f76f2fb5e47p+0, 0x1.c199bdd85529cp+0,
    0x1.cb720dcef9069p+0, 0x1.d5818dcfba487p+0, 0x1.dfc97337b9b5fp+0,
    0x1.ea4afa2a490dap+0, 0x1.f50765b6e4540p+0};

static inline double tf_exp_scale(int k) {
  /* 2^m, k = 32 m + j, |m| <= 1010 */
  int m = (k - (k & 31)) / 32;
  uint64_t b = (uint64_t)(m + 1023) << 52;
  double v;
  memcpy(&v, &b, sizeof v);
  return v;
}

static inline tf_v2d tf_exp_v2d(tf_v2d x) {
  if (!(x[0] <= 700.0 && x[0] >= -700.0 && x[1] <= 700.0 && x[1] >= -700.0))
    return (tf_v2d){exp(x[0]), exp(x[1])};
  const double inv_l = 0x1.71547652b82fep+5; /* 32 / ln 2 */
  const double l_hi = 0x1.62e42fefa0000p-6;  /* ln2 / 32, 38 bits */
  const double l_lo = 0x1.cf79abc9e3b3ap-45; /* ln2 / 32 - l_hi */
  const double shift = 0x1.8p52;
  tf_v2d kd = (x * inv_l + shift) - shift;
  int k0 = (int)kd[0], k1 = (int)kd[1];
  tf_v2d r = (x - kd * l_hi) - kd * l_lo;
  tf_v2d r2 = r * r;
  tf_v2d q = (r + r2 * 0.5) + r2 * r *
                                 ((1.0 / 6 + r * (1.0 / 24)) +
                                  r2 * (1.0 / 120 + r * (1.0 / 720)));
  tf_v2d t = {tf_exp_tab[k0 & 31], tf_exp_tab[k1 & 31]};
  tf_v2d sc = {tf_exp_scale(k0), tf_exp_scale(k1)};
  return sc * (t + t * q);
}

#endif
