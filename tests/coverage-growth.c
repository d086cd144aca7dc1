/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Coverage study of the growth-rate intervals (run by make check).
 *
 * Simulates negative-binomial NB2 series with a known growth rate r and
 * weekday effects (fixed seed, GSL's MT19937), over short windows of 21
 * and 28 days, mean counts 5 to 500 per day at the window's middle and
 * theta from 5 to 50, fits each with the default options (NB2, weekday
 * effects, theta by maximum likelihood) and reports the coverage of every
 * interval type.  The test fails unless the DEFAULT interval's coverage
 * lies inside the central 99% range of Binomial(N, 0.95), N the number of
 * series (binomial quantiles by summing the pmf).  Failed fits count as
 * misses.  A Poisson section reports the Poisson default (profile) on
 * Poisson data, with the same assertion.
 */
#include "twofold.h"

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#define NK 4 /* default, wald, profile, small */

static void band(long N, double p, long *lo, long *hi) {
  double cum = 0.0;
  *lo = -1;
  *hi = N;
  for (long k = 0; k <= N; k++) {
    cum += gsl_ran_binomial_pdf((unsigned)k, p, (unsigned)N);
    if (*lo < 0 && cum >= 0.005)
      *lo = k;
    if (cum >= 0.995) {
      *hi = k;
      break;
    }
  }
}

/* weekday effects (log scale, sum zero): a weekend reporting dip */
static const double wdeff[7] = {0.15, 0.10, 0.08, 0.06, 0.05, -0.16, -0.28};

static int study(int model, const double *means, int nmean,
                 const double *thetas, int ntheta, int reps,
                 gsl_rng *rng) {
  const int lens[2] = {21, 28};
  twofold_fit *fit;
  twofold_fit_options *o;
  if (twofold_fit_new(&fit) || twofold_fit_options_new(&o))
    return 2;
  twofold_fit_options_set_model(o, model);
  long N = 0, cover[NK] = {0}, fails = 0;
  double width[NK] = {0};
  printf("%-8s %3s %6s %6s %5s  %7s %7s %7s %7s\n", "model", "n", "mean",
         "theta", "reps", "default", "wald", "profile", "small");
  for (int li = 0; li < 2; li++)
    for (int mi = 0; mi < nmean; mi++)
      for (int ti = 0; ti < ntheta; ti++) {
        int n = lens[li];
        long cN = 0, cc[NK] = {0};
        for (int rep = 0; rep < reps; rep++) {
          double y[28];
          double r = gsl_ran_flat(rng, -0.1, 0.1);
          int fwd = 1 + (int)gsl_rng_uniform_int(rng, 7);
          for (int t = 0; t < n; t++) {
            double mu = means[mi] * exp(r * (t - (n - 1) / 2.0) +
                                        wdeff[(fwd - 1 + t) % 7]);
            if (model == TWOFOLD_MODEL_NEGBIN) {
              double th = thetas[ti];
              y[t] = gsl_ran_negative_binomial(rng, th / (th + mu), th);
            } else {
              y[t] = gsl_ran_poisson(rng, mu);
            }
          }
          int rc = twofold_growth_fit(fit, o, y, NULL, (size_t)n, fwd);
          N++;
          cN++;
          if (rc) {
            fails++;
            if (getenv("COVERAGE_VERBOSE"))
              fprintf(stderr, "fit failed: %s\n", twofold_fit_errmsg(fit));
            continue;
          }
          for (int k = 0; k < NK; k++) {
            double lo, hi;
            twofold_fit_interval(fit, k, &lo, &hi);
            if (lo <= r && r <= hi) {
              cover[k]++;
              cc[k]++;
            }
            width[k] += hi - lo;
          }
        }
        printf("%-8s %3d %6g %6g %5ld  %7.3f %7.3f %7.3f %7.3f\n",
               twofold_model_to_string(model), n, means[mi],
               model == TWOFOLD_MODEL_NEGBIN ? thetas[ti] : INFINITY, cN,
               (double)cc[0] / cN, (double)cc[1] / cN, (double)cc[2] / cN,
               (double)cc[3] / cN);
      }
  long lo, hi;
  band(N, 0.95, &lo, &hi);
  printf("%s overall (N = %ld, failed fits %ld counted as misses):\n",
         twofold_model_to_string(model), N, fails);
  const char *names[NK] = {"default", "wald", "profile", "small"};
  for (int k = 0; k < NK; k++)
    printf("  %-8s coverage %.4f  mean width %.5f\n", names[k],
           (double)cover[k] / N, width[k] / (N - fails));
  printf("  99%% binomial band around 0.95: [%.4f, %.4f]\n", (double)lo / N,
         (double)hi / N);
  int bad = cover[0] < lo || cover[0] > hi;
  if (bad)
    printf("FAIL: %s default interval coverage %.4f outside [%.4f, %.4f]\n",
           twofold_model_to_string(model), (double)cover[0] / N,
           (double)lo / N, (double)hi / N);
  twofold_fit_free(fit);
  twofold_fit_options_free(o);
  return bad;
}

int main(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  if (rng == NULL)
    return 2;
  gsl_rng_set(rng, 20240611);
  const double means[4] = {5, 20, 100, 500};
  const double thetas[3] = {5, 15, 50};
  int bad = study(TWOFOLD_MODEL_NEGBIN, means, 4, thetas, 3, 84, rng);
  bad |= study(TWOFOLD_MODEL_POISSON, means, 4, thetas, 1, 63, rng);
  gsl_rng_free(rng);
  return bad ? 1 : 0;
}
