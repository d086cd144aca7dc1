/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Private helpers shared by the library's modules; not installed. */
#ifndef TWOFOLD_INTERNAL_H
#define TWOFOLD_INTERNAL_H

#include "twofold.h"

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

#endif
