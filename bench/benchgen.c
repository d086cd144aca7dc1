/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * benchgen.c - counts of the invented benchmark scenario.
 *
 * Each district (invented; the numbers resemble no real place) has its own
 * generator, gsl_rng_mt19937 seeded with BENCHGEN_SEED + index, so any one
 * district can be made without the others.  From it, in this order:
 *
 *  - level: expected cases per day on day 0, log-uniform on [2, 2000];
 *  - theta: NB2 dispersion of cases (variance mu + mu^2/theta), uniform on
 *    [5, 80];
 *  - weekday strength: uniform on [0.5, 1.5], scaling the weekday effects
 *    Monday -0.25, Tuesday +0.10, Wednesday +0.12, Thursday +0.10, Friday
 *    +0.08, Saturday 0, Sunday -0.15 (log scale, summing to zero);
 *  - admission fraction: uniform on [0.02, 0.06];
 *  - the growth rate of the first segment, Normal(0, 0.02) per day cut to
 *    [-0.08, 0.08].
 *
 * Then day by day: the log-level eta rises by the current growth rate r; on
 * each day after the first 28 of a segment a new segment starts with
 * probability 1/90 (about eight changes in two years), with a new rate
 * drawn as above; when eta leaves [log 0.5, log 20000] the rate turns back
 * towards the range (r = -r, a change too).  Cases: gamma-Poisson mixture
 * with mean exp(eta_t + weekday effect) (lambda ~ Gamma(theta, mu/theta),
 * cases ~ Poisson(lambda)); admissions ~ Poisson(fraction * exp(eta_{t-7}))
 * (eta extended backwards with the first rate before day 7).  A row is
 * absent (NaN) with probability 0.001, drawn after the counts so that the
 * stream does not shift.
 */
#include "benchgen.h"

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#define LAG 7
#define MIN_SEGMENT 28
#define CHANGE_PROB (1.0 / 90.0)
#define ABSENT_PROB 0.001

static const double weekday_effect[7] = {-0.25, 0.10, 0.12, 0.10,
                                         0.08,  0.0,  -0.15};

static double draw_rate(gsl_rng *rng) {
  double r = gsl_ran_gaussian(rng, 0.02);
  return r > 0.08 ? 0.08 : r < -0.08 ? -0.08 : r;
}

void benchgen_name(size_t index, char *buf, size_t size) {
  snprintf(buf, size, "district-%05zu", index + 1);
}

int benchgen_region(size_t index, size_t days, double *cases,
                    double *admissions) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  if (rng == NULL)
    return -1;
  double *eta = malloc((days + 1) * sizeof *eta);
  if (eta == NULL) {
    gsl_rng_free(rng);
    return -1;
  }
  gsl_rng_set(rng, BENCHGEN_SEED + (unsigned long)index);
  double level = exp(log(2.0) + gsl_rng_uniform(rng) * log(1000.0));
  double theta = 5.0 + 75.0 * gsl_rng_uniform(rng);
  double strength = 0.5 + gsl_rng_uniform(rng);
  double fraction = 0.02 + 0.04 * gsl_rng_uniform(rng);
  double r = draw_rate(rng);
  double r0 = r;
  const double lo = log(0.5), hi = log(20000.0);
  int age = 0;
  eta[0] = log(level);
  for (size_t t = 1; t < days; t++) {
    age++;
    if (age > MIN_SEGMENT && gsl_rng_uniform(rng) < CHANGE_PROB) {
      r = draw_rate(rng);
      age = 0;
    }
    double e = eta[t - 1] + r;
    if ((e > hi && r > 0) || (e < lo && r < 0)) {
      r = -r;
      age = 0;
      e = eta[t - 1] + r;
    }
    eta[t] = e;
  }
  for (size_t t = 0; t < days; t++) {
    double mu = exp(eta[t] + strength * weekday_effect[t % 7]);
    double lambda = gsl_ran_gamma(rng, theta, mu / theta);
    double c = (double)gsl_ran_poisson(rng, lambda);
    double past = t >= LAG ? eta[t - LAG] : eta[0] - r0 * (double)(LAG - t);
    double a = (double)gsl_ran_poisson(rng, fraction * exp(past));
    int absent = gsl_rng_uniform(rng) < ABSENT_PROB;
    if (cases != NULL)
      cases[t] = absent ? NAN : c;
    if (admissions != NULL)
      admissions[t] = absent ? NAN : a;
  }
  free(eta);
  gsl_rng_free(rng);
  return 0;
}
