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
  double i = 1.0 / x, i2 = i * i;
  double ser =
      i2 * (1.0 / 12.0 -
            i2 * (1.0 / 120.0 -
                  i2 * (1.0 / 252.0 -
                        i2 * (1.0 / 240.0 -
                              i2 * (1.0 / 132.0 -
                                    i2 * (691.0 / 32760.0 - i2 / 12.0))))));
  return acc + log(x) - 0.5 * i - ser;
}

double tf_trigamma(double x) {
  double acc = 0.0;
  while (x < 10.0) {
    acc += 1.0 / (x * x);
    x += 1.0;
  }
  double i = 1.0 / x, i2 = i * i;
  double ser =
      i * (1.0 +
           i * (0.5 +
                i * (1.0 / 6.0 -
                     i2 * (1.0 / 30.0 -
                           i2 * (1.0 / 42.0 -
                                 i2 * (1.0 / 30.0 -
                                       i2 * (5.0 / 66.0 -
                                             i2 * (691.0 / 2730.0 -
                                                   i2 * 7.0 / 6.0))))))));
  return acc + ser;
}
