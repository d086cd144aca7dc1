/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Digamma and trigamma for the negative binomial theta search (no GSL
 * call, so nothing can reach GSL's error handler), in a file of their own
 * so that tests/check_growth_psi.c can compare them with GSL. */
#include "growth_internal.h"

#include <math.h>

/* Digamma and trigamma for x > 0: the recurrences psi(x) = psi(x+1) - 1/x
 * and psi'(x) = psi'(x+1) + 1/x^2 up to x >= 10, then the asymptotic
 * series (Abramowitz & Stegun 1964, 6.3.18 and 6.4.12) to the x^-14 and
 * x^-15 terms, whose next terms are below 1e-16 at x = 10.  Checked
 * against GSL's gsl_sf_psi and gsl_sf_psi_1 in tests/check_growth.c.  No
 * GSL call, so no GSL error for tiny x (psi'(x) -> +inf as 1/x^2). */
double tf_digamma(double x) {
  double acc = 0.0;
  while (x < 10.0) {
    acc -= 1.0 / x;
    x += 1.0;
  }
  return acc + log(x) + tf_psi_mlog(x);
}

double tf_trigamma(double x) {
  double acc = 0.0;
  while (x < 10.0) {
    acc += 1.0 / (x * x);
    x += 1.0;
  }
  return acc + tf_tri_ser(x);
}
