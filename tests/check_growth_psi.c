/* SPDX-License-Identifier: GPL-3.0-or-later */
/* The growth module's digamma and trigamma (lib/growth_psi.c) against
 * GSL's gsl_sf_psi and gsl_sf_psi_1 (the reference: GSL reference manual,
 * "Psi (Digamma) Function"), over x from 1e-8 to 1e8, to 1e-13 relative
 * (absolute near the root of digamma at x = 1.4616...).  Also the
 * recurrence identities psi(x+1) = psi(x) + 1/x and psi'(x+1) =
 * psi'(x) - 1/x^2 (Abramowitz & Stegun 1964, 6.3.5 and 6.4.6) across the
 * switch to the asymptotic series at x = 10, and psi(1) = -Euler's
 * constant, psi'(1) = pi^2/6 (A&S 6.3.2, 6.4.2). */
#include "growth_internal.h"

#include <check.h>
#include <gsl/gsl_sf_psi.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

START_TEST(against_gsl) {
  double worst1 = 0.0, worst2 = 0.0;
  for (double lx = -8.0; lx <= 8.0; lx += 0.00731) {
    double x = pow(10.0, lx);
    double a = tf_digamma(x), ga = gsl_sf_psi(x);
    double b = tf_trigamma(x), gb = gsl_sf_psi_1(x);
    double e1 = fabs(a - ga) / fmax(1.0, fabs(ga));
    double e2 = fabs(b - gb) / fabs(gb);
    worst1 = fmax(worst1, e1);
    worst2 = fmax(worst2, e2);
    ck_assert_msg(e1 < 1e-13, "digamma(%.17g) = %.17g, GSL %.17g", x, a, ga);
    ck_assert_msg(e2 < 1e-13, "trigamma(%.17g) = %.17g, GSL %.17g", x, b,
                  gb);
  }
  printf("worst relative difference from GSL: digamma %.2e, trigamma "
         "%.2e\n",
         worst1, worst2);
}
END_TEST

START_TEST(identities) {
  const double euler = 0.57721566490153286061, pi = 3.14159265358979323846;
  ck_assert(fabs(tf_digamma(1.0) + euler) < 1e-15);
  ck_assert(fabs(tf_trigamma(1.0) - pi * pi / 6.0) < 1e-15);
  for (double x = 8.5; x < 11.0; x += 0.125) {
    ck_assert(fabs(tf_digamma(x + 1.0) - tf_digamma(x) - 1.0 / x) < 2e-15);
    ck_assert(fabs(tf_trigamma(x) - tf_trigamma(x + 1.0) - 1.0 / (x * x)) <
              1e-16);
  }
  /* tiny arguments: finite digamma, trigamma 1/x^2 (+inf once that
   * overflows), and no call into GSL */
  ck_assert(fabs(tf_digamma(1e-200) * 1e-200 + 1.0) < 1e-15);
  ck_assert(isinf(tf_trigamma(1e-200)));
}
END_TEST

int main(void) {
  Suite *s = suite_create("growth_psi");
  TCase *tc = tcase_create("psi");
  tcase_add_test(tc, against_gsl);
  tcase_add_test(tc, identities);
  suite_add_tcase(s, tc);
  SRunner *sr = srunner_create(s);
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
