/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * The growth module's public face: enum names, fit options, the fit
 * object and its getters, and the doubling-time mapping.  The numerics
 * live in growth_fit.c, rolling windows in roll.c.
 *
 * Intervals for r (twofold_fit_interval):
 *  - WALD: r +- z SE (normal quantile).  Quasi-Poisson: SE scaled by
 *    sqrt(X^2/(n-p)) and a t_{n-p} quantile.
 *  - PROFILE: {r : 2 [l_hat - l_p(r)] <= chi^2_{1,level}}, l_p the profile
 *    log-likelihood; for NB2 theta is re-estimated at every r (full
 *    profile; MASS's confint.glm keeps theta fixed instead).  Quasi-Poisson:
 *    the deviance drop divided by the dispersion, against t_{n-p}^2.
 *  - SMALL (and DEFAULT, unless the options choose another kind):
 *     * NB2: the Wald interval with theta from the Cox-Reid adjusted
 *       profile likelihood (Cox DR, Reid N 1987, Parameter orthogonality
 *       and approximate conditional inference, J R Stat Soc B 49:1-39;
 *       applied to the negative binomial dispersion by Robinson MD,
 *       Smyth GK 2008, Small-sample estimation of negative binomial
 *       dispersion, Biostatistics 9:321-332, and to NB GLMs by McCarthy DJ,
 *       Chen Y, Smyth GK 2012, Nucleic Acids Res 40:4288-4297), which
 *       removes the first-order bias of the ML theta (too little
 *       overdispersion in short windows), with the standard error at that
 *       theta and a Student t quantile on the n - p residual degrees of
 *       freedom, the usual reference distribution when a dispersion is
 *       estimated (McCullagh P, Nelder JA 1989, Generalized Linear Models,
 *       2nd ed., Chapman & Hall, section 9.2).
 *     * Poisson: the profile-likelihood interval (the dispersion is known,
 *       so there is no nuisance dispersion to correct for).
 *     * Quasi-Poisson: the Wald interval with the t quantile.
 *    The coverage study tests/coverage-growth.c measures them all.
 */
#include "growth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct twofold_fit {
  tf_gres res;
  int interval; /* options' interval kind at fit time */
  int has_fit;
};

/* ------------------------------------------------------------------ */
/* Enum names                                                          */
/* ------------------------------------------------------------------ */

static const char *const model_names[] = {"poisson", "quasipoisson",
                                          "negbin"};
static const char *const interval_names[] = {"default", "wald", "profile",
                                             "small"};
static const char *const align_names[] = {"trailing", "centred"};

static int name_index(const char *const *names, int count, const char *s) {
  if (s == NULL)
    return TWOFOLD_EINVAL;
  for (int i = 0; i < count; i++)
    if (strcmp(names[i], s) == 0)
      return i;
  return TWOFOLD_EINVAL;
}

const char *twofold_model_to_string(int model) {
  return model >= 0 && model < 3 ? model_names[model] : NULL;
}
int twofold_model_from_string(const char *name) {
  return name_index(model_names, 3, name);
}
const char *twofold_interval_to_string(int kind) {
  return kind >= 0 && kind < 4 ? interval_names[kind] : NULL;
}
int twofold_interval_from_string(const char *name) {
  return name_index(interval_names, 4, name);
}
const char *twofold_align_to_string(int align) {
  return align >= 0 && align < 2 ? align_names[align] : NULL;
}
int twofold_align_from_string(const char *name) {
  return name_index(align_names, 2, name);
}

/* ------------------------------------------------------------------ */
/* Options                                                             */
/* ------------------------------------------------------------------ */

int twofold_fit_options_new(twofold_fit_options **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  twofold_fit_options *o = malloc(sizeof *o);
  *out = o;
  if (o == NULL)
    return TWOFOLD_ENOMEM;
  o->model = TWOFOLD_MODEL_NEGBIN;
  o->level = 0.95;
  o->weekday = 1;
  o->interval = TWOFOLD_INTERVAL_DEFAULT;
  o->min_events = TWOFOLD_MIN_EVENTS_DEFAULT;
  o->max_iter = 50;
  o->tol = 1e-10;
  return TWOFOLD_OK;
}

void twofold_fit_options_free(twofold_fit_options *o) { free(o); }

int twofold_fit_options_copy(const twofold_fit_options *o,
                             twofold_fit_options **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (o == NULL)
    return TWOFOLD_EINVAL;
  twofold_fit_options *c = malloc(sizeof *c);
  if (c == NULL)
    return TWOFOLD_ENOMEM;
  *c = *o;
  *out = c;
  return TWOFOLD_OK;
}

int twofold_fit_options_set_model(twofold_fit_options *o, int model) {
  if (o == NULL || model < 0 || model > 2)
    return TWOFOLD_EINVAL;
  o->model = model;
  return TWOFOLD_OK;
}
int twofold_fit_options_get_model(const twofold_fit_options *o) {
  return o ? o->model : TWOFOLD_EINVAL;
}
int twofold_fit_options_set_level(twofold_fit_options *o, double level) {
  if (o == NULL || !(level > 0.0 && level < 1.0))
    return TWOFOLD_EINVAL;
  o->level = level;
  return TWOFOLD_OK;
}
double twofold_fit_options_get_level(const twofold_fit_options *o) {
  return o ? o->level : NAN;
}
int twofold_fit_options_set_weekday(twofold_fit_options *o, int on) {
  if (o == NULL || (on != 0 && on != 1))
    return TWOFOLD_EINVAL;
  o->weekday = on;
  return TWOFOLD_OK;
}
int twofold_fit_options_get_weekday(const twofold_fit_options *o) {
  return o ? o->weekday : TWOFOLD_EINVAL;
}
int twofold_fit_options_set_interval(twofold_fit_options *o, int kind) {
  if (o == NULL || kind < 0 || kind > 3)
    return TWOFOLD_EINVAL;
  o->interval = kind;
  return TWOFOLD_OK;
}
int twofold_fit_options_get_interval(const twofold_fit_options *o) {
  return o ? o->interval : TWOFOLD_EINVAL;
}
int twofold_fit_options_set_min_events(twofold_fit_options *o,
                                       double events) {
  if (o == NULL || !(events >= 0.0) || !isfinite(events))
    return TWOFOLD_EINVAL;
  o->min_events = events;
  return TWOFOLD_OK;
}
double twofold_fit_options_get_min_events(const twofold_fit_options *o) {
  return o ? o->min_events : NAN;
}
int twofold_fit_options_set_max_iterations(twofold_fit_options *o,
                                           int iterations) {
  if (o == NULL || iterations < 1 || iterations > 100000)
    return TWOFOLD_EINVAL;
  o->max_iter = iterations;
  return TWOFOLD_OK;
}
int twofold_fit_options_get_max_iterations(const twofold_fit_options *o) {
  return o ? o->max_iter : TWOFOLD_EINVAL;
}
int twofold_fit_options_set_tolerance(twofold_fit_options *o,
                                      double tolerance) {
  if (o == NULL || !(tolerance > 0.0 && tolerance < 1.0))
    return TWOFOLD_EINVAL;
  o->tol = tolerance;
  return TWOFOLD_OK;
}
double twofold_fit_options_get_tolerance(const twofold_fit_options *o) {
  return o ? o->tol : NAN;
}

/* ------------------------------------------------------------------ */
/* Fits                                                                */
/* ------------------------------------------------------------------ */

int twofold_fit_new(twofold_fit **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  twofold_fit *f = calloc(1, sizeof *f);
  *out = f;
  if (f == NULL)
    return TWOFOLD_ENOMEM;
  f->res.status = TWOFOLD_EINVAL;
  tf_msg_set(f->res.msg, TWOFOLD_EINVAL, "no fit has been made");
  f->res.r = f->res.se = NAN;
  return TWOFOLD_OK;
}

void twofold_fit_free(twofold_fit *fit) { free(fit); }

int twofold_growth_fit(twofold_fit *fit, const twofold_fit_options *o,
                       const double *y, const double *offset, size_t n,
                       int first_weekday) {
  if (fit == NULL)
    return TWOFOLD_EINVAL;
  fit->has_fit = 0;
  twofold_fit_options def;
  if (o == NULL) {
    twofold_fit_options *d;
    if (twofold_fit_options_new(&d) != 0) {
      fit->res.status = TWOFOLD_ENOMEM;
      tf_msg_set(fit->res.msg, TWOFOLD_ENOMEM, "out of memory");
      return TWOFOLD_ENOMEM;
    }
    def = *d;
    twofold_fit_options_free(d);
    o = &def;
  }
  if (y == NULL || n == 0 || first_weekday < 1 || first_weekday > 7) {
    memset(&fit->res, 0, sizeof fit->res);
    fit->res.r = fit->res.se = NAN;
    fit->res.status = TWOFOLD_EINVAL;
    tf_msg_set(fit->res.msg, TWOFOLD_EINVAL,
               y == NULL ? "no counts given (y is NULL)"
               : n == 0  ? "empty window (n = 0)"
                         : "first weekday %d is not an ISO weekday 1..7",
               first_weekday);
    return TWOFOLD_EINVAL;
  }
  fit->interval = o->interval;
  int rc = tf_growth_core(o, y, offset, n, first_weekday - 1,
                          TF_WANT_ALL | TF_WANT_LOGLIK, NULL, NULL,
                          &fit->res);
  fit->has_fit = rc == 0;
  return rc;
}

static int ok(const twofold_fit *f) { return f && f->has_fit; }

int twofold_fit_status(const twofold_fit *fit) {
  return fit ? fit->res.status : TWOFOLD_EINVAL;
}
const char *twofold_fit_errmsg(const twofold_fit *fit) {
  if (fit == NULL)
    return "no fit (NULL)";
  return fit->res.status == 0 ? "" : fit->res.msg;
}
unsigned int twofold_fit_flags(const twofold_fit *fit) {
  return fit ? fit->res.flags : 0u;
}
int twofold_fit_model(const twofold_fit *fit) {
  return ok(fit) ? fit->res.model : TWOFOLD_EINVAL;
}
double twofold_fit_rate(const twofold_fit *fit) {
  return ok(fit) ? fit->res.r : NAN;
}
double twofold_fit_rate_se(const twofold_fit *fit) {
  return ok(fit) ? fit->res.se : NAN;
}

int tf_interval_pick(const tf_gres *res, int kind, int opt_kind, double *lo,
                     double *hi) {
  if (kind == TWOFOLD_INTERVAL_DEFAULT)
    kind = opt_kind == TWOFOLD_INTERVAL_DEFAULT ? TF_DEFAULT_INTERVAL
                                                : opt_kind;
  const double *v;
  switch (kind) {
  case TWOFOLD_INTERVAL_WALD:
    v = res->wald;
    break;
  case TWOFOLD_INTERVAL_PROFILE:
    v = res->prof;
    break;
  case TWOFOLD_INTERVAL_SMALL:
    v = res->small;
    break;
  default:
    return TWOFOLD_EINVAL;
  }
  if (lo)
    *lo = v[0];
  if (hi)
    *hi = v[1];
  return TWOFOLD_OK;
}

int twofold_fit_interval(const twofold_fit *fit, int kind, double *lo,
                         double *hi) {
  if (lo)
    *lo = NAN;
  if (hi)
    *hi = NAN;
  if (fit == NULL || kind < 0 || kind > 3)
    return TWOFOLD_EINVAL;
  if (!fit->has_fit)
    return fit->res.status != 0 ? fit->res.status : TWOFOLD_EINVAL;
  return tf_interval_pick(&fit->res, kind, fit->interval, lo, hi);
}

double twofold_fit_level(const twofold_fit *fit) {
  return ok(fit) ? fit->res.level : NAN;
}

double twofold_fit_intercept(const twofold_fit *fit) {
  if (!ok(fit))
    return NAN;
  const tf_gres *r = &fit->res;
  double a = 0.0;
  for (int j = 0; j < r->nclass; j++)
    a += r->b[j];
  return a / r->nclass;
}

double twofold_fit_weekday_effect(const twofold_fit *fit, int weekday) {
  if (!ok(fit) || weekday < 1 || weekday > 7)
    return NAN;
  if (fit->res.nclass == 1)
    return 0.0;
  return fit->res.b[weekday - 1] - twofold_fit_intercept(fit);
}

double twofold_fit_theta(const twofold_fit *fit) {
  return ok(fit) ? fit->res.theta : NAN;
}
double twofold_fit_theta_adjusted(const twofold_fit *fit) {
  return ok(fit) ? fit->res.theta_cr : NAN;
}
double twofold_fit_dispersion(const twofold_fit *fit) {
  return ok(fit) ? fit->res.disp : NAN;
}
double twofold_fit_loglik(const twofold_fit *fit) {
  return ok(fit) ? fit->res.ll : NAN;
}
double twofold_fit_deviance(const twofold_fit *fit) {
  return ok(fit) ? fit->res.dev : NAN;
}
int twofold_fit_iterations(const twofold_fit *fit) {
  return ok(fit) ? fit->res.iter : 0;
}
double twofold_fit_events(const twofold_fit *fit) {
  return fit && (fit->has_fit || fit->res.used > 0) ? fit->res.events : NAN;
}
size_t twofold_fit_days_used(const twofold_fit *fit) {
  return fit ? fit->res.used : 0;
}
size_t twofold_fit_days_missing(const twofold_fit *fit) {
  return fit ? fit->res.missing : 0;
}
double twofold_fit_df_residual(const twofold_fit *fit) {
  return ok(fit) ? fit->res.df : NAN;
}

/* ------------------------------------------------------------------ */
/* Doubling time                                                       */
/* ------------------------------------------------------------------ */

int twofold_doubling_time(double r, double r_lo, double r_hi, double *time,
                          double *time_lo, double *time_hi, int *sense) {
  if (time)
    *time = NAN;
  if (time_lo)
    *time_lo = NAN;
  if (time_hi)
    *time_hi = NAN;
  if (sense)
    *sense = 0;
  if (!isfinite(r) || tf_isnan(r_lo) || tf_isnan(r_hi) || r_lo > r ||
      r_hi < r)
    return TWOFOLD_EINVAL;
  const double ln2 = 0.69314718055994530942;
  int s = r > 0.0 ? 1 : r < 0.0 ? -1 : 0;
  double T = s == 0 ? INFINITY : ln2 / fabs(r);
  double lo, hi;
  if (s >= 0) {
    /* doubling (or r == 0: read as doubling, both ends from r_hi/r_lo) */
    lo = r_hi > 0.0 ? ln2 / r_hi : INFINITY;
    hi = r_lo > 0.0 ? ln2 / r_lo : INFINITY;
  } else {
    /* halving: |r| in [|r_hi|, |r_lo|] */
    lo = r_lo < 0.0 ? ln2 / -r_lo : INFINITY;
    hi = r_hi < 0.0 ? ln2 / -r_hi : INFINITY;
  }
  if (time)
    *time = T;
  if (time_lo)
    *time_lo = lo;
  if (time_hi)
    *time_hi = hi;
  if (sense)
    *sense = s;
  return TWOFOLD_OK;
}
