/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Transmission: from an exponential growth rate r to a reproduction number.
 *
 * Wallinga J, Lipsitch M (2007). How generation intervals shape the
 * relationship between growth rates and reproductive numbers. Proc R Soc B
 * 274:599-604.  In a population growing as e^{rt} the Euler-Lotka equation
 * gives
 *
 *     R = 1 / M(-r),   M(z) = E[e^{zT}],
 *
 * M the moment generating function of the generation interval T.
 *
 *  - Gamma interval with mean m and standard deviation s: shape a = m^2/s^2,
 *    rate b = m/s^2, M(-r) = (1 + r/b)^{-a}, so R = (1 + r/b)^a, defined
 *    for 1 + r/b > 0 (r > -b); for r <= -b the integral diverges
 *    (Wallinga & Lipsitch 2007, eq. for the gamma distribution).  With
 *    s = m (a = 1) it is the exponential interval of the SIR model,
 *    R = 1 + r m.
 *  - Discrete interval, probability p_k of k+1 days: M(-r) =
 *    sum_k p_k e^{-r(k+1)}, R = 1 / M(-r), computed in log space by
 *    log-sum-exp so that large |r| neither overflows nor loses digits too
 *    early.
 *
 * R is increasing in r (M(-r) is decreasing in r for a positive interval),
 * so an interval for r maps endpoint by endpoint onto an interval for R.
 */
#include "internal.h"

#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

enum tf_gi_kind { TF_GI_GAMMA = 1, TF_GI_DISCRETE = 2 };

struct twofold_gi {
  int kind;
  double mean; /* days */
  double sd;   /* days */
  /* gamma */
  double shape; /* a = m^2 / s^2 */
  double rate;  /* b = m / s^2 */
  /* discrete */
  size_t n;
  double *logp; /* log of the normalised probabilities; -INFINITY for 0 */
};

static int finite_positive(double v) { return isfinite(v) && v > 0.0; }

int twofold_gi_new_gamma(double mean, double sd, twofold_gi **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (!finite_positive(mean) || !finite_positive(sd))
    return TWOFOLD_EINVAL;
  double cv = sd / mean; /* coefficient of variation */
  double shape = 1.0 / (cv * cv);
  double rate = shape / mean; /* = m / s^2 */
  /* Extreme ratios of mean to sd overflow or underflow the parameters. */
  if (!finite_positive(cv) || !finite_positive(shape) ||
      !finite_positive(rate))
    return TWOFOLD_EINVAL;
  twofold_gi *gi = calloc(1, sizeof *gi);
  if (gi == NULL)
    return TWOFOLD_ENOMEM;
  gi->kind = TF_GI_GAMMA;
  gi->mean = mean;
  gi->sd = sd;
  gi->shape = shape;
  gi->rate = rate;
  *out = gi;
  return TWOFOLD_OK;
}

int twofold_gi_new_discrete(const double *p, size_t n, twofold_gi **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (p == NULL || n == 0)
    return TWOFOLD_EINVAL;
  if (n > SIZE_MAX / sizeof(double))
    return TWOFOLD_ETOOLARGE;
  double pmax = 0.0;
  for (size_t k = 0; k < n; k++) {
    if (!isfinite(p[k]) || p[k] < 0.0)
      return TWOFOLD_EINVAL;
    if (p[k] > pmax)
      pmax = p[k];
  }
  if (!(pmax > 0.0))
    return TWOFOLD_EINVAL; /* all zero */
  /* Scale by the largest entry first, so the sum neither overflows nor
   * underflows: every term is in [0, 1] and the sum in [1, n]. */
  double sum = 0.0;
  for (size_t k = 0; k < n; k++)
    sum += p[k] / pmax;
  twofold_gi *gi = calloc(1, sizeof *gi);
  if (gi == NULL)
    return TWOFOLD_ENOMEM;
  gi->logp = malloc(n * sizeof *gi->logp);
  if (gi->logp == NULL) {
    free(gi);
    return TWOFOLD_ENOMEM;
  }
  gi->kind = TF_GI_DISCRETE;
  gi->n = n;
  double lsum = log(sum), lmax = log(pmax);
  double mean = 0.0;
  for (size_t k = 0; k < n; k++) {
    double q = p[k] / pmax / sum;
    gi->logp[k] = p[k] > 0.0 ? log(p[k]) - lmax - lsum : -INFINITY;
    mean += q * (double)(k + 1);
  }
  double var = 0.0; /* two-pass variance */
  for (size_t k = 0; k < n; k++) {
    double q = p[k] / pmax / sum, d = (double)(k + 1) - mean;
    var += q * d * d;
  }
  gi->mean = mean;
  gi->sd = sqrt(var);
  *out = gi;
  return TWOFOLD_OK;
}

void twofold_gi_free(twofold_gi *gi) {
  if (gi == NULL)
    return;
  free(gi->logp);
  free(gi);
}

double twofold_gi_mean(const twofold_gi *gi) {
  return gi != NULL ? gi->mean : NAN;
}

double twofold_gi_sd(const twofold_gi *gi) { return gi != NULL ? gi->sd : NAN; }

/* R for a valid gi and finite r; *R set only on success. */
static int reproduction(const twofold_gi *gi, double r, double *R) {
  double logR;
  if (gi->kind == TF_GI_GAMMA) {
    /* Wallinga & Lipsitch (2007): R = (1 + r/b)^a, needing 1 + r/b > 0.
     * log1p keeps the digits for small r/b. */
    double x = r / gi->rate;
    if (!(x > -1.0) || !isfinite(x))
      return TWOFOLD_ERANGE;
    logR = gi->shape * log1p(x);
  } else {
    /* R = 1 / sum_k p_k e^{-r(k+1)}: log M(-r) by log-sum-exp over the
     * days with positive probability. */
    double top = -INFINITY;
    for (size_t k = 0; k < gi->n; k++) {
      if (gi->logp[k] == -INFINITY)
        continue;
      double v = gi->logp[k] - r * (double)(k + 1);
      if (v > top)
        top = v;
    }
    if (!isfinite(top))
      return TWOFOLD_ERANGE;
    double s = 0.0;
    for (size_t k = 0; k < gi->n; k++) {
      if (gi->logp[k] == -INFINITY)
        continue;
      s += exp(gi->logp[k] - r * (double)(k + 1) - top);
    }
    logR = -(top + log(s)); /* s is in [1, n] */
  }
  if (!isfinite(logR))
    return TWOFOLD_ERANGE;
  double value = exp(logR);
  if (!isfinite(value))
    return TWOFOLD_ERANGE; /* R overflows a double */
  *R = value;
  return TWOFOLD_OK;
}

static int gi_ok(const twofold_gi *gi) {
  return gi != NULL &&
         (gi->kind == TF_GI_GAMMA ||
          (gi->kind == TF_GI_DISCRETE && gi->logp != NULL && gi->n > 0));
}

int twofold_gi_reproduction(const twofold_gi *gi, double r, double *R) {
  if (R == NULL)
    return TWOFOLD_EINVAL;
  *R = NAN;
  if (!gi_ok(gi) || !isfinite(r))
    return TWOFOLD_EINVAL;
  return reproduction(gi, r, R);
}

int twofold_gi_reproduction_interval(const twofold_gi *gi, double r,
                                     double r_lo, double r_hi, double *R,
                                     double *R_lo, double *R_hi) {
  if (R == NULL || R_lo == NULL || R_hi == NULL)
    return TWOFOLD_EINVAL;
  *R = *R_lo = *R_hi = NAN;
  if (!gi_ok(gi) || !isfinite(r) || !isfinite(r_lo) || !isfinite(r_hi) ||
      !(r_lo <= r) || !(r <= r_hi))
    return TWOFOLD_EINVAL;
  /* R is increasing in r: map the endpoints (Wallinga & Lipsitch 2007). */
  double v, vlo, vhi;
  int rc = reproduction(gi, r, &v);
  if (rc == 0)
    rc = reproduction(gi, r_lo, &vlo);
  if (rc == 0)
    rc = reproduction(gi, r_hi, &vhi);
  if (rc != 0)
    return rc;
  *R = v;
  *R_lo = vlo;
  *R_hi = vhi;
  return TWOFOLD_OK;
}
