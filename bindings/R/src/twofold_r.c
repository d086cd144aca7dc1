/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * .Call glue between R and libtwofold.  Only type translation happens
 * here: R vectors in, library calls, R vectors out.  Day numbers are the
 * same in both worlds (days since 1970-01-01: R's Date and twofold's day).
 *
 * Errors: a failing library call makes the glue return a "status" list
 * (code, name, message, line, column) of class "twofold_status"; the R
 * wrappers turn it into an R condition of class "twofold_error".  Library
 * handles are held in external pointers with finalizers, so an R error
 * (e.g. memory exhaustion while building a result) cannot leak them.
 */
#include <math.h>
#include <stdint.h>
#include <string.h>

#define R_NO_REMAP
#include <R.h>
#include <R_ext/Rdynload.h>
#include <Rinternals.h>

#include <twofold.h>

/* ---- status lists ---------------------------------------------------- */

static SEXP status_list(int code, const char *message, long line,
                        long column) {
  const char *names[] = {"code", "name", "message", "line", "column", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  SET_VECTOR_ELT(out, 0, Rf_ScalarInteger(code));
  SET_VECTOR_ELT(out, 1, Rf_mkString(twofold_err_name(code)));
  SET_VECTOR_ELT(out, 2,
                 Rf_mkString(message && *message ? message
                                                 : twofold_strerror(code)));
  SET_VECTOR_ELT(out, 3, Rf_ScalarInteger(line > 0 ? (int)line : NA_INTEGER));
  SET_VECTOR_ELT(out, 4,
                 Rf_ScalarInteger(column > 0 ? (int)column : NA_INTEGER));
  Rf_setAttrib(out, R_ClassSymbol, Rf_mkString("twofold_status"));
  UNPROTECT(1);
  return out;
}

static SEXP status_code(int code) { return status_list(code, NULL, 0, 0); }

/* ---- external pointers for library handles --------------------------- */

/* A finalizer for handles of type T: FREE on the address, then cleared
 * (so a second call, or release() before the collector, is harmless). */
#define FINALIZER(NAME, T, FREE)                                               \
  static void NAME(SEXP p) {                                                   \
    FREE((T *)R_ExternalPtrAddr(p));                                           \
    R_ClearExternalPtr(p);                                                     \
  }
FINALIZER(fin_set, twofold_set, twofold_set_free)
FINALIZER(fin_fit, twofold_fit, twofold_fit_free)
FINALIZER(fin_opts, twofold_fit_options, twofold_fit_options_free)
FINALIZER(fin_ropts, twofold_read_options, twofold_read_options_free)
FINALIZER(fin_gi, twofold_gi, twofold_gi_free)

/* An external pointer holding NULL for now, with finalizer fin; the
 * handle is stored with R_SetExternalPtrAddr right after creation. */
static SEXP holder(R_CFinalizer_t fin) {
  SEXP p = PROTECT(R_MakeExternalPtr(NULL, R_NilValue, R_NilValue));
  R_RegisterCFinalizerEx(p, fin, TRUE);
  UNPROTECT(1);
  return p;
}

/* Free now rather than at the next garbage collection. */
static void release(SEXP p, R_CFinalizer_t fin) { fin(p); }

/* ---- argument helpers ------------------------------------------------ */

static const char *opt_string(SEXP x) {
  if (Rf_isNull(x))
    return NULL;
  if (!Rf_isString(x) || XLENGTH(x) != 1 || STRING_ELT(x, 0) == NA_STRING)
    Rf_error("expected a single string");
  return Rf_translateCharUTF8(STRING_ELT(x, 0));
}

static SEXP list_get(SEXP list, const char *name) {
  SEXP names = Rf_getAttrib(list, R_NamesSymbol);
  for (R_xlen_t i = 0; i < XLENGTH(list); i++)
    if (strcmp(CHAR(STRING_ELT(names, i)), name) == 0)
      return VECTOR_ELT(list, i);
  return R_NilValue;
}

/* A twofold_fit_options from the R list opts (entries NULL = library
 * default); *status gets 0 or a library code, *what the failing option. */
static twofold_fit_options *make_options(SEXP opts, SEXP hold, int *status,
                                         const char **what) {
  twofold_fit_options *o = NULL;
  *what = NULL;
  *status = twofold_fit_options_new(&o);
  if (*status < 0)
    return NULL;
  R_SetExternalPtrAddr(hold, o);
  SEXP v;
  int st = 0;
  if (!Rf_isNull(v = list_get(opts, "model"))) {
    int m = twofold_model_from_string(opt_string(v));
    st = m < 0 ? m : twofold_fit_options_set_model(o, m);
    if (st < 0)
      *what = "unknown model (use \"poisson\", \"quasipoisson\" or "
              "\"negbin\")";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "level"))) {
    st = twofold_fit_options_set_level(o, Rf_asReal(v));
    if (st < 0)
      *what = "level must be in (0, 1)";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "weekday"))) {
    int on = Rf_asLogical(v);
    st = on == NA_LOGICAL ? TWOFOLD_EINVAL
                          : twofold_fit_options_set_weekday(o, on);
    if (st < 0)
      *what = "weekday must be TRUE or FALSE";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "interval"))) {
    int k = twofold_interval_from_string(opt_string(v));
    st = k < 0 ? k : twofold_fit_options_set_interval(o, k);
    if (st < 0)
      *what = "unknown interval (use \"default\", \"wald\", \"profile\" or "
              "\"small\")";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "min_events"))) {
    st = twofold_fit_options_set_min_events(o, Rf_asReal(v));
    if (st < 0)
      *what = "invalid min_events";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "max_iterations"))) {
    st = twofold_fit_options_set_max_iterations(o, Rf_asInteger(v));
    if (st < 0)
      *what = "invalid max_iterations";
  }
  if (st == 0 && !Rf_isNull(v = list_get(opts, "tolerance"))) {
    st = twofold_fit_options_set_tolerance(o, Rf_asReal(v));
    if (st < 0)
      *what = "invalid tolerance";
  }
  *status = st;
  return o;
}

static const double *opt_offset(SEXP offset, R_xlen_t n, int *bad) {
  *bad = 0;
  if (Rf_isNull(offset))
    return NULL;
  if (TYPEOF(offset) != REALSXP || XLENGTH(offset) != n) {
    *bad = 1;
    return NULL;
  }
  return REAL(offset);
}

/* ---- version, names -------------------------------------------------- */

static SEXP tfr_version(void) { return Rf_mkString(twofold_version_string()); }

static SEXP tfr_weekday(SEXP day) {
  return Rf_ScalarInteger(twofold_date_weekday((int32_t)Rf_asInteger(day)));
}

/* ---- reading --------------------------------------------------------- */

/* list(region = chr, first_day = int, length = int, columns = list of
 * named numeric vectors) for each series of the set. */
static SEXP set_to_list(const twofold_set *set) {
  size_t n = twofold_set_count(set);
  SEXP out = PROTECT(Rf_allocVector(VECSXP, (R_xlen_t)n));
  const char *names[] = {"region", "first_day", "columns", ""};
  for (size_t i = 0; i < n; i++) {
    const twofold_series *s = twofold_set_at(set, i);
    size_t len = twofold_series_length(s), nc = twofold_series_columns(s);
    SEXP item = PROTECT(Rf_mkNamed(VECSXP, names));
    SET_VECTOR_ELT(item, 0, Rf_ScalarString(Rf_mkCharCE(
                                twofold_series_region(s), CE_UTF8)));
    SET_VECTOR_ELT(item, 1, Rf_ScalarInteger(twofold_series_first_day(s)));
    SEXP cols = PROTECT(Rf_allocVector(VECSXP, (R_xlen_t)nc));
    SEXP cnames = PROTECT(Rf_allocVector(STRSXP, (R_xlen_t)nc));
    for (size_t c = 0; c < nc; c++) {
      SEXP v = PROTECT(Rf_allocVector(REALSXP, (R_xlen_t)len));
      const double *src = twofold_series_values(s, c);
      for (size_t k = 0; k < len; k++)
        REAL(v)[k] = ISNAN(src[k]) ? NA_REAL : src[k];
      SET_VECTOR_ELT(cols, (R_xlen_t)c, v);
      SET_STRING_ELT(cnames, (R_xlen_t)c,
                     Rf_mkCharCE(twofold_series_column_name(s, c), CE_UTF8));
      UNPROTECT(1);
    }
    Rf_setAttrib(cols, R_NamesSymbol, cnames);
    SET_VECTOR_ELT(item, 2, cols);
    SET_VECTOR_ELT(out, (R_xlen_t)i, item);
    UNPROTECT(3);
  }
  UNPROTECT(1);
  return out;
}

static SEXP tfr_read(SEXP path, SEXP layout, SEXP region, SEXP date,
                     SEXP count) {
  const char *p = opt_string(path);
  const char *lay = opt_string(layout);
  const char *reg = opt_string(region), *dat = opt_string(date),
             *cnt = opt_string(count);
  if (p == NULL)
    return status_list(TWOFOLD_EINVAL, "no file name", 0, 0);
  SEXP hopts = PROTECT(holder(fin_ropts));
  SEXP hset = PROTECT(holder(fin_set));
  twofold_read_options *o = NULL;
  int st = twofold_read_options_new(&o);
  if (st < 0) {
    UNPROTECT(2);
    return status_code(st);
  }
  R_SetExternalPtrAddr(hopts, o);
  if (lay) {
    int l = twofold_layout_from_string(lay);
    st = l < 0 ? l : twofold_read_options_set_layout(o, l);
    if (st < 0) {
      UNPROTECT(2);
      return status_list(st, "unknown layout (use \"auto\", \"long\" or "
                             "\"wide\")", 0, 0);
    }
  }
  if (st == 0 && reg)
    st = twofold_read_options_set_region_column(o, reg);
  if (st == 0 && dat)
    st = twofold_read_options_set_date_column(o, dat);
  if (st == 0 && cnt)
    st = twofold_read_options_set_count_column(o, cnt);
  if (st < 0) {
    UNPROTECT(2);
    return status_code(st);
  }
  twofold_set *set = NULL;
  twofold_error err;
  memset(&err, 0, sizeof err);
  st = twofold_read_file(R_ExpandFileName(p), o, &set, &err);
  release(hopts, fin_ropts);
  if (st < 0) {
    UNPROTECT(2);
    return status_list(err.code < 0 ? err.code : st, err.text, err.line,
                       err.column);
  }
  R_SetExternalPtrAddr(hset, set);
  SEXP out = PROTECT(set_to_list(set));
  release(hset, fin_set);
  UNPROTECT(3);
  return out;
}

/* Check counts as the library does (twofold_series_from_counts): returns
 * 0 or a status list. */
static SEXP tfr_check_counts(SEXP y) {
  if (TYPEOF(y) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  twofold_series *s = NULL;
  int st = twofold_series_from_counts("", 0, REAL(y), (size_t)XLENGTH(y),
                                      "counts", &s);
  twofold_series_free(s);
  if (st < 0)
    return status_code(st);
  return Rf_ScalarInteger(0);
}

/* ---- growth ---------------------------------------------------------- */

static SEXP tfr_fit(SEXP y, SEXP offset, SEXP first_weekday, SEXP opts) {
  if (TYPEOF(y) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  R_xlen_t n = XLENGTH(y);
  int bad;
  const double *off = opt_offset(offset, n, &bad);
  if (bad)
    return status_list(TWOFOLD_EINVAL,
                       "offset must be numeric and as long as the counts", 0,
                       0);
  SEXP hopts = PROTECT(holder(fin_opts));
  SEXP hfit = PROTECT(holder(fin_fit));
  int st;
  const char *what;
  twofold_fit_options *o = make_options(opts, hopts, &st, &what);
  if (st < 0) {
    UNPROTECT(2);
    return status_list(st, what, 0, 0);
  }
  twofold_fit *fit = NULL;
  st = twofold_fit_new(&fit);
  if (st < 0) {
    UNPROTECT(2);
    return status_code(st);
  }
  R_SetExternalPtrAddr(hfit, fit);
  st = twofold_growth_fit(fit, o, REAL(y), off, (size_t)n,
                          Rf_asInteger(first_weekday));
  if (st < 0) {
    SEXP e = status_list(st, twofold_fit_errmsg(fit), 0, 0);
    UNPROTECT(2);
    return e;
  }
  double lo = NAN, hi = NAN, wlo = NAN, whi = NAN;
  st = twofold_fit_interval(fit, TWOFOLD_INTERVAL_DEFAULT, &lo, &hi);
  if (st == 0)
    st = twofold_fit_interval(fit, TWOFOLD_INTERVAL_WALD, &wlo, &whi);
  if (st < 0) {
    SEXP e = status_list(st, twofold_fit_errmsg(fit), 0, 0);
    UNPROTECT(2);
    return e;
  }
  const char *names[] = {"model", "rate", "se", "lo", "hi", "wald_lo",
                         "wald_hi", "level", "interval", "intercept",
                         "weekday_effects", "theta", "dispersion", "loglik",
                         "deviance", "iterations", "events", "days_used",
                         "days_missing", "df_residual", "flags", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  const char *model = twofold_model_to_string(twofold_fit_model(fit));
  SET_VECTOR_ELT(out, 0, Rf_mkString(model ? model : ""));
  SET_VECTOR_ELT(out, 1, Rf_ScalarReal(twofold_fit_rate(fit)));
  SET_VECTOR_ELT(out, 2, Rf_ScalarReal(twofold_fit_rate_se(fit)));
  SET_VECTOR_ELT(out, 3, Rf_ScalarReal(lo));
  SET_VECTOR_ELT(out, 4, Rf_ScalarReal(hi));
  SET_VECTOR_ELT(out, 5, Rf_ScalarReal(wlo));
  SET_VECTOR_ELT(out, 6, Rf_ScalarReal(whi));
  SET_VECTOR_ELT(out, 7, Rf_ScalarReal(twofold_fit_level(fit)));
  const char *kind =
      twofold_interval_to_string(twofold_fit_options_get_interval(o));
  SET_VECTOR_ELT(out, 8, Rf_mkString(kind ? kind : ""));
  SET_VECTOR_ELT(out, 9, Rf_ScalarReal(twofold_fit_intercept(fit)));
  SEXP wd = PROTECT(Rf_allocVector(REALSXP, 7));
  for (int d = 1; d <= 7; d++)
    REAL(wd)[d - 1] = twofold_fit_weekday_effect(fit, d);
  SET_VECTOR_ELT(out, 10, wd);
  SET_VECTOR_ELT(out, 11, Rf_ScalarReal(twofold_fit_theta(fit)));
  SET_VECTOR_ELT(out, 12, Rf_ScalarReal(twofold_fit_dispersion(fit)));
  SET_VECTOR_ELT(out, 13, Rf_ScalarReal(twofold_fit_loglik(fit)));
  SET_VECTOR_ELT(out, 14, Rf_ScalarReal(twofold_fit_deviance(fit)));
  SET_VECTOR_ELT(out, 15, Rf_ScalarInteger(twofold_fit_iterations(fit)));
  SET_VECTOR_ELT(out, 16, Rf_ScalarReal(twofold_fit_events(fit)));
  SET_VECTOR_ELT(out, 17,
                 Rf_ScalarReal((double)twofold_fit_days_used(fit)));
  SET_VECTOR_ELT(out, 18,
                 Rf_ScalarReal((double)twofold_fit_days_missing(fit)));
  SET_VECTOR_ELT(out, 19, Rf_ScalarReal(twofold_fit_df_residual(fit)));
  unsigned flags = twofold_fit_flags(fit);
  const char *fl[3];
  int nf = 0;
  if (flags & TWOFOLD_FIT_MISSING_DAYS)
    fl[nf++] = "missing_days";
  if (flags & TWOFOLD_FIT_THETA_CAPPED)
    fl[nf++] = "theta_capped";
  if (flags & TWOFOLD_FIT_LARGE_COUNTS)
    fl[nf++] = "large_counts";
  SEXP fs = PROTECT(Rf_allocVector(STRSXP, nf));
  for (int i = 0; i < nf; i++)
    SET_STRING_ELT(fs, i, Rf_mkChar(fl[i]));
  SET_VECTOR_ELT(out, 20, fs);
  release(hfit, fin_fit);
  release(hopts, fin_opts);
  UNPROTECT(5);
  return out;
}

static SEXP tfr_roll(SEXP y, SEXP offset, SEXP first_weekday, SEXP window,
                     SEXP align, SEXP opts) {
  if (TYPEOF(y) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  R_xlen_t n = XLENGTH(y);
  int bad;
  const double *off = opt_offset(offset, n, &bad);
  if (bad)
    return status_list(TWOFOLD_EINVAL,
                       "offset must be numeric and as long as the counts", 0,
                       0);
  int w = Rf_asInteger(window);
  if (w == NA_INTEGER || w < 1)
    return status_list(TWOFOLD_EINVAL, "window must be a positive number of "
                                       "days", 0, 0);
  int al = 0;
  const char *as = opt_string(align);
  if (as) {
    al = twofold_align_from_string(as);
    if (al < 0)
      return status_list(al, "unknown align (use \"trailing\" or "
                             "\"centred\")", 0, 0);
  }
  const char *names[] = {"rate", "lo", "hi", "status", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  SEXP rate = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP lo = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP hi = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP stat = PROTECT(Rf_allocVector(INTSXP, n));
  SEXP hopts = PROTECT(holder(fin_opts));
  int st;
  const char *what;
  twofold_fit_options *o = make_options(opts, hopts, &st, &what);
  if (st < 0) {
    UNPROTECT(6);
    return status_list(st, what, 0, 0);
  }
  st = twofold_growth_roll(o, REAL(y), off, (size_t)n,
                           Rf_asInteger(first_weekday), (size_t)w, al,
                           REAL(rate), REAL(lo), REAL(hi), INTEGER(stat));
  release(hopts, fin_opts);
  if (st < 0) {
    UNPROTECT(6);
    return status_code(st);
  }
  SEXP sn = PROTECT(Rf_allocVector(STRSXP, n));
  for (R_xlen_t i = 0; i < n; i++) {
    SET_STRING_ELT(sn, i, Rf_mkChar(twofold_err_name(INTEGER(stat)[i])));
    if (ISNAN(REAL(rate)[i]))
      REAL(rate)[i] = NA_REAL;
    if (ISNAN(REAL(lo)[i]))
      REAL(lo)[i] = NA_REAL;
    if (ISNAN(REAL(hi)[i]))
      REAL(hi)[i] = NA_REAL;
  }
  SET_VECTOR_ELT(out, 0, rate);
  SET_VECTOR_ELT(out, 1, lo);
  SET_VECTOR_ELT(out, 2, hi);
  SET_VECTOR_ELT(out, 3, sn);
  UNPROTECT(7);
  return out;
}

/* Vectorised twofold_doubling_time; NA where any input is NA. */
static SEXP tfr_doubling(SEXP r, SEXP lo, SEXP hi) {
  R_xlen_t n = XLENGTH(r);
  if (TYPEOF(r) != REALSXP || TYPEOF(lo) != REALSXP ||
      TYPEOF(hi) != REALSXP || XLENGTH(lo) != n || XLENGTH(hi) != n)
    return status_list(TWOFOLD_EINVAL,
                       "rate, lo and hi must be numeric of equal length", 0,
                       0);
  const char *names[] = {"time", "lo", "hi", "sense", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  SEXP t = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP tl = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP th = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP se = PROTECT(Rf_allocVector(INTSXP, n));
  for (R_xlen_t i = 0; i < n; i++) {
    double a = REAL(r)[i], b = REAL(lo)[i], c = REAL(hi)[i];
    REAL(t)[i] = REAL(tl)[i] = REAL(th)[i] = NA_REAL;
    INTEGER(se)[i] = NA_INTEGER;
    if (ISNAN(a) || ISNAN(b) || ISNAN(c))
      continue;
    int sense = 0;
    int st = twofold_doubling_time(a, b, c, REAL(t) + i, REAL(tl) + i,
                                   REAL(th) + i, &sense);
    if (st < 0) {
      UNPROTECT(5);
      return status_code(st);
    }
    INTEGER(se)[i] = sense;
  }
  SET_VECTOR_ELT(out, 0, t);
  SET_VECTOR_ELT(out, 1, tl);
  SET_VECTOR_ELT(out, 2, th);
  SET_VECTOR_ELT(out, 3, se);
  UNPROTECT(5);
  return out;
}

/* ---- transmission ---------------------------------------------------- */

/* R (and its interval) for vectors r, lo, hi under a gamma (mean, sd) or
 * discrete (p) generation interval; lo/hi may be NULL. */
static SEXP tfr_reproduction(SEXP r, SEXP lo, SEXP hi, SEXP mean, SEXP sd,
                             SEXP p) {
  R_xlen_t n = XLENGTH(r);
  int bounds = !Rf_isNull(lo);
  if (TYPEOF(r) != REALSXP ||
      (bounds && (TYPEOF(lo) != REALSXP || TYPEOF(hi) != REALSXP ||
                  XLENGTH(lo) != n || XLENGTH(hi) != n)))
    return status_list(TWOFOLD_EINVAL,
                       "rate, lo and hi must be numeric of equal length", 0,
                       0);
  SEXP hgi = PROTECT(holder(fin_gi));
  twofold_gi *gi = NULL;
  int st;
  if (!Rf_isNull(p)) {
    if (TYPEOF(p) != REALSXP) {
      UNPROTECT(1);
      return status_list(TWOFOLD_EINVAL, "gi_p must be numeric", 0, 0);
    }
    st = twofold_gi_new_discrete(REAL(p), (size_t)XLENGTH(p), &gi);
  } else {
    st = twofold_gi_new_gamma(Rf_asReal(mean), Rf_asReal(sd), &gi);
  }
  if (st < 0) {
    UNPROTECT(1);
    return status_list(st, "invalid generation interval", 0, 0);
  }
  R_SetExternalPtrAddr(hgi, gi);
  const char *names[] = {"R", "lo", "hi", "gi_mean", "gi_sd", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  SEXP R = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP Rl = PROTECT(Rf_allocVector(REALSXP, n));
  SEXP Rh = PROTECT(Rf_allocVector(REALSXP, n));
  for (R_xlen_t i = 0; i < n; i++) {
    double a = REAL(r)[i];
    REAL(R)[i] = REAL(Rl)[i] = REAL(Rh)[i] = NA_REAL;
    if (bounds) {
      double b = REAL(lo)[i], c = REAL(hi)[i];
      if (ISNAN(a) || ISNAN(b) || ISNAN(c))
        continue;
      st = twofold_gi_reproduction_interval(gi, a, b, c, REAL(R) + i,
                                            REAL(Rl) + i, REAL(Rh) + i);
    } else {
      if (ISNAN(a))
        continue;
      st = twofold_gi_reproduction(gi, a, REAL(R) + i);
    }
    if (st < 0) {
      UNPROTECT(5);
      return status_list(st, "the generation interval's moment generating "
                             "function does not exist at this growth rate",
                         0, 0);
    }
  }
  SET_VECTOR_ELT(out, 0, R);
  SET_VECTOR_ELT(out, 1, Rl);
  SET_VECTOR_ELT(out, 2, Rh);
  SET_VECTOR_ELT(out, 3, Rf_ScalarReal(twofold_gi_mean(gi)));
  SET_VECTOR_ELT(out, 4, Rf_ScalarReal(twofold_gi_sd(gi)));
  release(hgi, fin_gi);
  UNPROTECT(5);
  return out;
}

/* ---- changepoints ---------------------------------------------------- */

FINALIZER(fin_cpopts, twofold_cp_options, twofold_cp_options_free)
FINALIZER(fin_changes, twofold_changes, twofold_changes_free)

static SEXP real_vec(R_xlen_t n) { return Rf_allocVector(REALSXP, n); }

/* Options from the R list opts (NULL entries: library defaults); on a
 * failing setter *status < 0 and the options' message explains it. */
static int cp_options(SEXP opts, twofold_cp_options *o) {
  SEXP v;
  int st = 0;
  if (!Rf_isNull(v = list_get(opts, "kind"))) {
    int k = twofold_cp_kind_from_string(opt_string(v));
    st = k < 0 ? k : twofold_cp_options_set_kind(o, k);
    if (st < 0)
      return st;
  }
#define TF_CP_REAL(name)                                                     \
  if (!Rf_isNull(v = list_get(opts, #name)) &&                               \
      (st = twofold_cp_options_set_##name(o, Rf_asReal(v))) < 0)             \
    return st;
#define TF_CP_INT(name)                                                      \
  if (!Rf_isNull(v = list_get(opts, #name)) &&                               \
      (st = twofold_cp_options_set_##name(o, Rf_asInteger(v))) < 0)          \
    return st;
  TF_CP_REAL(changes_per_year)
  TF_CP_REAL(change_prob)
  TF_CP_INT(min_segment)
  TF_CP_INT(length_shape)
  TF_CP_REAL(dispersion)
  TF_CP_INT(weekday)
  TF_CP_REAL(prune)
  TF_CP_INT(max_changes)
  TF_CP_REAL(level)
  TF_CP_INT(grid)
#undef TF_CP_REAL
#undef TF_CP_INT
  if (!Rf_isNull(v = list_get(opts, "rate_prior"))) {
    if (TYPEOF(v) != REALSXP || XLENGTH(v) != 2)
      return TWOFOLD_EINVAL;
    if ((st = twofold_cp_options_set_rate_prior(o, REAL(v)[0], REAL(v)[1])) < 0)
      return st;
  }
  if (!Rf_isNull(v = list_get(opts, "level_prior"))) {
    if (TYPEOF(v) != REALSXP || XLENGTH(v) != 2)
      return TWOFOLD_EINVAL;
    if ((st = twofold_cp_options_set_level_prior(o, REAL(v)[0], REAL(v)[1])) <
        0)
      return st;
  }
  return 0;
}

/* A new options object owned by the holder hopts, set from the R list
 * opts; NULL with *err the status to return. */
static twofold_cp_options *new_cp_options(SEXP hopts, SEXP opts, SEXP *err) {
  twofold_cp_options *o = NULL;
  int st = twofold_cp_options_new(&o);
  if (st < 0) {
    *err = status_code(st);
    return NULL;
  }
  R_SetExternalPtrAddr(hopts, o);
  st = cp_options(opts, o);
  if (st < 0) {
    *err = status_list(st, twofold_cp_options_errmsg(o), 0, 0);
    return NULL;
  }
  return o;
}

static SEXP tfr_changes(SEXP y, SEXP first_weekday, SEXP opts) {
  if (TYPEOF(y) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  SEXP hopts = PROTECT(holder(fin_cpopts));
  SEXP hch = PROTECT(holder(fin_changes));
  SEXP err = R_NilValue;
  twofold_cp_options *o = new_cp_options(hopts, opts, &err);
  if (o == NULL) {
    UNPROTECT(2);
    return err;
  }
  int st;
  twofold_changes *ch = NULL;
  st = twofold_changes_new(&ch);
  if (st < 0) {
    UNPROTECT(2);
    return status_code(st);
  }
  R_SetExternalPtrAddr(hch, ch);
  R_xlen_t n = XLENGTH(y);
  st = twofold_changes_run(ch, o, REAL(y), (size_t)n,
                           Rf_asInteger(first_weekday));
  if (st < 0) {
    SEXP e = status_list(st, twofold_changes_errmsg(ch), 0, 0);
    UNPROTECT(2);
    return e;
  }
  const char *names[] = {"kind", "p_change", "rate", "lo", "hi",
                         "doubling_time", "doubling_lo", "doubling_hi",
                         "sense", "count_prob", "count_tail", "count_mean",
                         "dispersion", "weekday_effects", "log_evidence",
                         "change_day", "change_from", "change_to",
                         "change_prob", "seg_start", "seg_end", "seg_rate",
                         "seg_lo", "seg_hi", "seg_level", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  const char *kind = twofold_cp_kind_to_string(twofold_changes_kind(ch));
  SET_VECTOR_ELT(out, 0, Rf_mkString(kind ? kind : ""));
  for (int i = 1; i <= 7; i++)
    SET_VECTOR_ELT(out, i, real_vec(n));
  SET_VECTOR_ELT(out, 8, Rf_allocVector(INTSXP, n));
  st = twofold_changes_p_change(ch, REAL(VECTOR_ELT(out, 1)));
  if (st == 0)
    st = twofold_changes_growth(ch, REAL(VECTOR_ELT(out, 2)),
                                REAL(VECTOR_ELT(out, 3)),
                                REAL(VECTOR_ELT(out, 4)));
  if (st == 0)
    st = twofold_changes_doubling(ch, REAL(VECTOR_ELT(out, 5)),
                                  REAL(VECTOR_ELT(out, 6)),
                                  REAL(VECTOR_ELT(out, 7)),
                                  INTEGER(VECTOR_ELT(out, 8)));
  size_t size = (size_t)twofold_cp_options_get_max_changes(o) + 1;
  SET_VECTOR_ELT(out, 9, real_vec((R_xlen_t)size));
  double tail = 0;
  if (st == 0)
    st = twofold_changes_count_prob(ch, REAL(VECTOR_ELT(out, 9)), size, &tail);
  if (st < 0) {
    SEXP e = status_list(st, twofold_changes_errmsg(ch), 0, 0);
    UNPROTECT(3);
    return e;
  }
  SET_VECTOR_ELT(out, 10, Rf_ScalarReal(tail));
  SET_VECTOR_ELT(out, 11, Rf_ScalarReal(twofold_changes_count_mean(ch)));
  SET_VECTOR_ELT(out, 12, Rf_ScalarReal(twofold_changes_dispersion(ch)));
  SEXP wd = real_vec(7);
  SET_VECTOR_ELT(out, 13, wd);
  for (int d = 1; d <= 7; d++)
    REAL(wd)[d - 1] = twofold_changes_weekday_effect(ch, d);
  SET_VECTOR_ELT(out, 14, Rf_ScalarReal(twofold_changes_log_evidence(ch)));
  size_t k = twofold_changes_map_count(ch);
  for (int i = 15; i <= 18; i++)
    SET_VECTOR_ELT(out, i, real_vec((R_xlen_t)k));
  for (int i = 19; i <= 24; i++)
    SET_VECTOR_ELT(out, i, real_vec((R_xlen_t)k + 1));
  for (size_t j = 0; j < k && st == 0; j++) {
    size_t day = 0, from = 0, to = 0;
    double prob = NAN;
    st = twofold_changes_map_change(ch, j, &day, &from, &to, &prob);
    REAL(VECTOR_ELT(out, 15))[j] = (double)day;
    REAL(VECTOR_ELT(out, 16))[j] = (double)from;
    REAL(VECTOR_ELT(out, 17))[j] = (double)to;
    REAL(VECTOR_ELT(out, 18))[j] = prob;
  }
  for (size_t j = 0; j <= k && st == 0; j++) {
    size_t s0 = 0, s1 = 0;
    double r = NAN, rl = NAN, rh = NAN, lev = NAN;
    st = twofold_changes_map_segment(ch, j, &s0, &s1, &r, &rl, &rh, &lev);
    REAL(VECTOR_ELT(out, 19))[j] = (double)s0;
    REAL(VECTOR_ELT(out, 20))[j] = (double)s1;
    REAL(VECTOR_ELT(out, 21))[j] = r;
    REAL(VECTOR_ELT(out, 22))[j] = rl;
    REAL(VECTOR_ELT(out, 23))[j] = rh;
    REAL(VECTOR_ELT(out, 24))[j] = lev;
  }
  if (st < 0) {
    SEXP e = status_list(st, twofold_changes_errmsg(ch), 0, 0);
    UNPROTECT(3);
    return e;
  }
  release(hch, fin_changes);
  release(hopts, fin_cpopts);
  UNPROTECT(3);
  return out;
}

/* ---- online changepoint filter --------------------------------------- */

/* A filter lives in an external pointer tagged "twofold_online" with a
 * finalizer; the R object (class "twofold_online") refers to it, so
 * adding days changes the filter in place.  A pointer restored from a
 * saved workspace holds NULL and is rejected. */
FINALIZER(fin_online, twofold_online, twofold_online_free)

static twofold_online *online_get(SEXP p) {
  if (TYPEOF(p) != EXTPTRSXP || R_ExternalPtrTag(p) != Rf_install("twofold_online"))
    return NULL;
  return (twofold_online *)R_ExternalPtrAddr(p);
}

static SEXP online_invalid(void) {
  return status_list(TWOFOLD_EINVAL,
                     "not a live online filter (made by online_changes in "
                     "this session)",
                     0, 0);
}

/* A whole number in [lo, 2^53] from an R numeric scalar, or -1. */
static double whole_arg(SEXP x, double lo) {
  if ((TYPEOF(x) != REALSXP && TYPEOF(x) != INTSXP) || XLENGTH(x) != 1)
    return -1;
  double v = Rf_asReal(x);
  if (ISNAN(v) || v < lo || v > 9007199254740992.0 || v != floor(v))
    return -1;
  return v;
}

static SEXP tfr_online_new(SEXP history, SEXP first_weekday,
                           SEXP max_candidates, SEXP seed, SEXP opts) {
  if (!Rf_isNull(history) && TYPEOF(history) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  double mc = whole_arg(max_candidates, 0), sd = whole_arg(seed, 0);
  if (mc < 0)
    return status_list(TWOFOLD_EINVAL,
                       "max_candidates must be a whole number", 0, 0);
  if (sd < 0)
    return status_list(TWOFOLD_EINVAL,
                       "seed must be a whole number from 0 to 2^53", 0, 0);
  SEXP hopts = PROTECT(holder(fin_cpopts));
  SEXP p = PROTECT(R_MakeExternalPtr(NULL, Rf_install("twofold_online"),
                                     R_NilValue));
  R_RegisterCFinalizerEx(p, fin_online, TRUE);
  SEXP err = R_NilValue;
  twofold_cp_options *o = new_cp_options(hopts, opts, &err);
  if (o == NULL) {
    UNPROTECT(2);
    return err;
  }
  int st;
  size_t n = Rf_isNull(history) ? 0 : (size_t)XLENGTH(history);
  twofold_online *on = NULL;
  st = twofold_online_new(o, n > 0 ? REAL(history) : NULL, n,
                          Rf_asInteger(first_weekday), (size_t)mc,
                          (uint64_t)sd, &on);
  release(hopts, fin_cpopts);
  if (st < 0) {
    UNPROTECT(2);
    /* twofold_online_new has no handle to carry a message */
    return status_list(st,
                       st == TWOFOLD_EINVAL
                           ? "invalid online filter arguments "
                             "(max_candidates must be at least 2)"
                           : NULL,
                       0, 0);
  }
  R_SetExternalPtrAddr(p, on);
  UNPROTECT(2);
  return p;
}

/* Add y[0..n-1] in order; stops at the first failing day (the days before
 * it stay added) with the filter's message.  Returns the days held. */
static SEXP tfr_online_add(SEXP p, SEXP y) {
  twofold_online *on = online_get(p);
  if (!on)
    return online_invalid();
  if (TYPEOF(y) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "counts must be numeric", 0, 0);
  for (R_xlen_t i = 0; i < XLENGTH(y); i++) {
    int st = twofold_online_add(on, REAL(y)[i]);
    if (st < 0)
      return status_list(st, twofold_online_errmsg(on), 0, 0);
  }
  return Rf_ScalarReal((double)twofold_online_days(on));
}

/* list(days, candidates, log_predictive) */
static SEXP tfr_online_state(SEXP p) {
  twofold_online *on = online_get(p);
  if (!on)
    return online_invalid();
  const char *names[] = {"days", "candidates", "log_predictive", ""};
  SEXP out = PROTECT(Rf_mkNamed(VECSXP, names));
  SET_VECTOR_ELT(out, 0, Rf_ScalarReal((double)twofold_online_days(on)));
  SET_VECTOR_ELT(out, 1,
                 Rf_ScalarReal((double)twofold_online_candidates(on)));
  double lp = twofold_online_log_predictive(on);
  SET_VECTOR_ELT(out, 2, Rf_ScalarReal(ISNAN(lp) ? NA_REAL : lp));
  UNPROTECT(1);
  return out;
}

/* P(a new regime within the last k days) for each k of a vector. */
static SEXP tfr_online_p_recent(SEXP p, SEXP k) {
  twofold_online *on = online_get(p);
  if (!on)
    return online_invalid();
  if (TYPEOF(k) != REALSXP)
    return status_list(TWOFOLD_EINVAL, "k must be numeric", 0, 0);
  R_xlen_t n = XLENGTH(k);
  SEXP out = PROTECT(real_vec(n));
  for (R_xlen_t i = 0; i < n; i++) {
    double v = REAL(k)[i];
    if (ISNAN(v) || v < 1 || v > 9007199254740992.0 || v != floor(v)) {
      UNPROTECT(1);
      return status_list(TWOFOLD_EINVAL,
                         "k must be a whole number of days, at least 1", 0,
                         0);
    }
    int st = twofold_online_p_recent(on, (size_t)v, REAL(out) + i);
    if (st < 0) {
      UNPROTECT(1);
      return status_list(st, twofold_online_errmsg(on), 0, 0);
    }
  }
  UNPROTECT(1);
  return out;
}

/* c(mean, lo, hi) of today's growth rate. */
static SEXP tfr_online_growth(SEXP p) {
  twofold_online *on = online_get(p);
  if (!on)
    return online_invalid();
  SEXP out = PROTECT(real_vec(3));
  int st = twofold_online_growth(on, REAL(out), REAL(out) + 1,
                                 REAL(out) + 2);
  if (st < 0) {
    UNPROTECT(1);
    /* the growth getter leaves the filter's message unset */
    return status_list(st,
                       st == TWOFOLD_ENODATA ? "no day added yet"
                                             : twofold_online_errmsg(on),
                       0, 0);
  }
  UNPROTECT(1);
  return out;
}

/* ---- registration ---------------------------------------------------- */

static const R_CallMethodDef call_methods[] = {
    {"tfr_version", (DL_FUNC)&tfr_version, 0},
    {"tfr_weekday", (DL_FUNC)&tfr_weekday, 1},
    {"tfr_read", (DL_FUNC)&tfr_read, 5},
    {"tfr_check_counts", (DL_FUNC)&tfr_check_counts, 1},
    {"tfr_fit", (DL_FUNC)&tfr_fit, 4},
    {"tfr_roll", (DL_FUNC)&tfr_roll, 6},
    {"tfr_doubling", (DL_FUNC)&tfr_doubling, 3},
    {"tfr_reproduction", (DL_FUNC)&tfr_reproduction, 6},
    {"tfr_changes", (DL_FUNC)&tfr_changes, 3},
    {"tfr_online_new", (DL_FUNC)&tfr_online_new, 5},
    {"tfr_online_add", (DL_FUNC)&tfr_online_add, 2},
    {"tfr_online_state", (DL_FUNC)&tfr_online_state, 1},
    {"tfr_online_p_recent", (DL_FUNC)&tfr_online_p_recent, 2},
    {"tfr_online_growth", (DL_FUNC)&tfr_online_growth, 1},
    {NULL, NULL, 0}};

void R_init_twofold(DllInfo *dll);
void R_init_twofold(DllInfo *dll) {
  R_registerRoutines(dll, NULL, call_methods, NULL, NULL);
  R_useDynamicSymbols(dll, FALSE);
  R_forceSymbols(dll, TRUE);
}
