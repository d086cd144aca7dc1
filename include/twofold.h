/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * twofold.h - the one public header of libtwofold.
 *
 * libtwofold measures epidemic growth in daily count series per region:
 * log-linear growth rates and doubling times with intervals, reproduction
 * numbers from growth rates, and Bayesian changepoints in the growth rate.
 *
 * Conventions (see libtwofold(3)):
 *  - Every exported symbol starts with twofold_, every macro with TWOFOLD_.
 *  - Fallible functions return int: 0 (TWOFOLD_OK) on success, a negative
 *    TWOFOLD_E... code otherwise.  twofold_strerror() names the code; handles
 *    keep a detailed message for their last error (..._errmsg()).
 *  - Types are opaque: create with ..._new(), free with ..._free(), which
 *    accepts NULL.  Options are opaque objects with one setter per option.
 *  - Ownership: a pointer returned through an out-parameter of ..._new() or
 *    of a function documented as "caller frees" belongs to the caller.  A
 *    const pointer returned by a getter is borrowed from the object it came
 *    from and stays valid until that object is modified or freed.  Pointer
 *    arguments are borrowed for the duration of the call unless stated.
 *  - No global state: distinct handles may be used from distinct threads at
 *    the same time; one handle belongs to one thread at a time.  The library
 *    never prints, exits, aborts or reads the environment, and never changes
 *    GSL's error handler (which belongs to the host program).
 *  - Days are integers: day 0 is 1970-01-01 in the proleptic Gregorian
 *    calendar.  Counts are doubles holding whole numbers (exact up to 2^53);
 *    a missing day is NaN, never zero.
 */
#ifndef TWOFOLD_H
#define TWOFOLD_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#if defined(TWOFOLD_BUILDING) && defined(__GNUC__)
#define TWOFOLD_API __attribute__((visibility("default")))
#else
#define TWOFOLD_API
#endif

/* ------------------------------------------------------------------ */
/* Version                                                             */
/* ------------------------------------------------------------------ */

#define TWOFOLD_VERSION_MAJOR 0
#define TWOFOLD_VERSION_MINOR 1
#define TWOFOLD_VERSION_PATCH 0
#define TWOFOLD_VERSION_STRING "0.1.0"
#define TWOFOLD_VERSION_HEX                                                  \
  ((TWOFOLD_VERSION_MAJOR << 16) | (TWOFOLD_VERSION_MINOR << 8) |             \
   TWOFOLD_VERSION_PATCH)

/* The run-time version as TWOFOLD_VERSION_HEX would give it. */
TWOFOLD_API unsigned int twofold_version(void);
/* The run-time version as "MAJOR.MINOR.PATCH"; static storage. */
TWOFOLD_API const char *twofold_version_string(void);

/* ------------------------------------------------------------------ */
/* Status codes                                                        */
/* ------------------------------------------------------------------ */

/* One list gives the codes, their names and their messages. */
#define TWOFOLD_ERRNO_MAP(XX)                                                \
  XX(NOMEM, -1, "out of memory")                                             \
  XX(INVAL, -2, "invalid argument")                                          \
  XX(IO, -3, "input/output error")                                           \
  XX(EMPTY, -4, "empty input")                                               \
  XX(PARSE, -5, "malformed CSV")                                             \
  XX(FIELDS, -6, "field count does not match the header")                    \
  XX(COLUMN, -7, "required column absent")                                   \
  XX(DATE, -8, "invalid or non-ISO 8601 date")                               \
  XX(COUNT, -9, "invalid count")                                             \
  XX(DUPLICATE, -10, "duplicate region and date")                            \
  XX(ENCODING, -11, "NUL byte or invalid UTF-8")                             \
  XX(GZIP, -12, "truncated or corrupt gzip stream")                          \
  XX(NOTFOUND, -13, "no such region, column or item")                        \
  XX(RANGE, -14, "value out of range")                                       \
  XX(ZERO, -15, "all counts in the window are zero")                         \
  XX(FEWEVENTS, -16, "too few events for a stable estimate")                 \
  XX(WEEKDAY, -17, "a weekday is absent from the window")                    \
  XX(SEPARATION, -18, "separation: zeros then positive counts")              \
  XX(NOCONV, -19, "the fit did not converge")                                \
  XX(NODATA, -20, "too few days with data")                                  \
  XX(TOOLARGE, -21, "input exceeds a size limit")

typedef enum twofold_status {
  TWOFOLD_OK = 0,
#define TWOFOLD_XX_(name, value, text) TWOFOLD_E##name = value,
  TWOFOLD_ERRNO_MAP(TWOFOLD_XX_)
#undef TWOFOLD_XX_
  TWOFOLD_E_LAST_ = -22
} twofold_status;

/* A short message for a status code ("success" for 0, "unknown error" for
 * codes not in the list); static storage, never NULL. */
TWOFOLD_API const char *twofold_strerror(int code);
/* The code's name, e.g. "TWOFOLD_EDATE"; static storage, never NULL. */
TWOFOLD_API const char *twofold_err_name(int code);

/* A caller-owned error report, filled by the reader (and any function
 * taking a twofold_error *, which may be NULL).  Fixed size: no allocation.
 * line and column are 1-based; 0 means "not applicable". */
#define TWOFOLD_ERROR_FILE_SIZE 256
#define TWOFOLD_ERROR_TEXT_SIZE 512
typedef struct twofold_error {
  int code;                            /* a TWOFOLD_E... code, 0 if none  */
  long line;                           /* physical line of the record     */
  long column;                         /* field number (1 = first field)  */
  char file[TWOFOLD_ERROR_FILE_SIZE];  /* the input's name                */
  char text[TWOFOLD_ERROR_TEXT_SIZE];  /* "FILE:LINE:COL: what, value"    */
} twofold_error;

/* Size of struct twofold_error, for bindings that allocate it themselves. */
TWOFOLD_API size_t twofold_error_size(void);

/* ------------------------------------------------------------------ */
/* Dates                                                               */
/* ------------------------------------------------------------------ */

/* Day numbers cover 0001-01-01 .. 9999-12-31. */
#define TWOFOLD_DAY_MIN (-719162)
#define TWOFOLD_DAY_MAX 2932896

/* Day number of a calendar date; TWOFOLD_EDATE if it does not exist. */
TWOFOLD_API int twofold_date_from_ymd(int year, int month, int day,
                                      int32_t *out);
/* Calendar date of a day number; TWOFOLD_ERANGE outside the range. */
TWOFOLD_API int twofold_date_to_ymd(int32_t day, int *year, int *month,
                                    int *mday);
/* Parse exactly "YYYY-MM-DD" (ISO 8601 extended calendar date) of length
 * len (text need not be NUL-terminated). */
TWOFOLD_API int twofold_date_parse(const char *text, size_t len,
                                   int32_t *out);
/* Write "YYYY-MM-DD" and a NUL into buf, which holds at least 11 bytes. */
TWOFOLD_API int twofold_date_format(int32_t day, char *buf, size_t size);
/* ISO 8601 weekday: 1 = Monday .. 7 = Sunday (any day number). */
TWOFOLD_API int twofold_date_weekday(int32_t day);
/* 1 if year is a leap year in the proleptic Gregorian calendar, else 0. */
TWOFOLD_API int twofold_date_is_leap(int year);

/* ------------------------------------------------------------------ */
/* Series: one region's daily counts                                   */
/* ------------------------------------------------------------------ */

/* A series holds one region's days first_day .. first_day+length-1 and one
 * or more named count columns on those days (column 0 is the primary one,
 * e.g. "cases"; further columns such as "admissions" share the dates).
 * Every value starts missing (NaN). */
typedef struct twofold_series twofold_series;

/* Create a series with one column named column0 (copied).  Caller frees. */
TWOFOLD_API int twofold_series_new(const char *region, int32_t first_day,
                                   size_t length, const char *column0,
                                   twofold_series **out);
/* Create a one-column series from values[0..length-1] (NaN = missing);
 * each value must be NaN or a whole number in [0, 2^53]. Caller frees. */
TWOFOLD_API int twofold_series_from_counts(const char *region,
                                           int32_t first_day,
                                           const double *values,
                                           size_t length, const char *column0,
                                           twofold_series **out);
/* A deep copy.  Caller frees. */
TWOFOLD_API int twofold_series_copy(const twofold_series *s,
                                    twofold_series **out);
TWOFOLD_API void twofold_series_free(twofold_series *s);

/* Add a column named name (all missing); its index goes to *index. */
TWOFOLD_API int twofold_series_add_column(twofold_series *s,
                                          const char *name, size_t *index);
/* Set the value of column col on day index i (0-based); NaN marks it
 * missing.  TWOFOLD_ECOUNT for a negative, fractional, infinite or
 * out-of-range (above 2^53) value. */
TWOFOLD_API int twofold_series_set(twofold_series *s, size_t col, size_t i,
                                   double value);

TWOFOLD_API const char *twofold_series_region(const twofold_series *s);
TWOFOLD_API int32_t twofold_series_first_day(const twofold_series *s);
TWOFOLD_API size_t twofold_series_length(const twofold_series *s);
TWOFOLD_API size_t twofold_series_columns(const twofold_series *s);
/* Name of column col, or NULL if col is out of range; borrowed. */
TWOFOLD_API const char *twofold_series_column_name(const twofold_series *s,
                                                   size_t col);
/* Index of the column called name, or TWOFOLD_ENOTFOUND. */
TWOFOLD_API int twofold_series_column_index(const twofold_series *s,
                                            const char *name);
/* The values of column col (length twofold_series_length(), NaN for a
 * missing day), or NULL if col is out of range; borrowed. */
TWOFOLD_API const double *twofold_series_values(const twofold_series *s,
                                                size_t col);
/* Number of missing days in column col. */
TWOFOLD_API size_t twofold_series_missing(const twofold_series *s,
                                          size_t col);
/* Sum of the present values of column col. */
TWOFOLD_API double twofold_series_total(const twofold_series *s, size_t col);
/* Gaps: maximal runs of missing days in column col.  twofold_series_gaps()
 * gives their number; twofold_series_gap() the k-th run's first day index
 * and length.  TWOFOLD_ENOTFOUND if k is out of range. */
TWOFOLD_API size_t twofold_series_gaps(const twofold_series *s, size_t col);
TWOFOLD_API int twofold_series_gap(const twofold_series *s, size_t col,
                                   size_t k, size_t *start, size_t *length);

/* ------------------------------------------------------------------ */
/* Sets of series: many regions                                        */
/* ------------------------------------------------------------------ */

typedef struct twofold_set twofold_set;

TWOFOLD_API int twofold_set_new(twofold_set **out);
TWOFOLD_API void twofold_set_free(twofold_set *set);
/* Add s; on success the set owns s.  TWOFOLD_EDUPLICATE if a series of
 * the same region is already there (s then stays the caller's). */
TWOFOLD_API int twofold_set_add(twofold_set *set, twofold_series *s);
TWOFOLD_API size_t twofold_set_count(const twofold_set *set);
/* The i-th series in order of addition (NULL if out of range); borrowed. */
TWOFOLD_API const twofold_series *twofold_set_at(const twofold_set *set,
                                                 size_t i);
/* The series of region name, or NULL; borrowed. */
TWOFOLD_API const twofold_series *twofold_set_find(const twofold_set *set,
                                                   const char *region);
/* The sum over all regions, named region: it spans the earliest first day
 * to the latest last day; a day is present only where every region reports
 * it.  Its columns are those every series has (by name), in the first
 * series' order.  TWOFOLD_EEMPTY for an empty set.  Caller frees. */
TWOFOLD_API int twofold_set_total(const twofold_set *set, const char *region,
                                  twofold_series **out);

/* ------------------------------------------------------------------ */
/* Reading CSV                                                         */
/* ------------------------------------------------------------------ */

/* Layout of a CSV file. */
typedef enum twofold_layout {
  TWOFOLD_LAYOUT_AUTO = 0, /* long if the region column is present      */
  TWOFOLD_LAYOUT_LONG = 1, /* one row per region and date               */
  TWOFOLD_LAYOUT_WIDE = 2  /* a date column and one column per region   */
} twofold_layout;

/* "auto", "long", "wide"; NULL for an unknown value. */
TWOFOLD_API const char *twofold_layout_to_string(int layout);
/* Layout from its name, or TWOFOLD_EINVAL. */
TWOFOLD_API int twofold_layout_from_string(const char *name);

typedef struct twofold_read_options twofold_read_options;

TWOFOLD_API int twofold_read_options_new(twofold_read_options **out);
TWOFOLD_API void twofold_read_options_free(twofold_read_options *o);
TWOFOLD_API int twofold_read_options_set_layout(twofold_read_options *o,
                                                int layout);
/* Column names (copied).  Defaults: "region" and "date". */
TWOFOLD_API int twofold_read_options_set_region_column(
    twofold_read_options *o, const char *name);
TWOFOLD_API int twofold_read_options_set_date_column(twofold_read_options *o,
                                                     const char *name);
/* Long layout: the primary count column (default NULL: the first column
 * that is neither the region nor the date column).  Every other column
 * becomes a further series column of the same name. */
TWOFOLD_API int twofold_read_options_set_count_column(
    twofold_read_options *o, const char *name);

/* Read a CSV file, plain or gzip-compressed (detected by its magic bytes).
 * opts may be NULL (defaults), err may be NULL.  On success *out is a new
 * set the caller frees; on failure *out is NULL and err says where. */
TWOFOLD_API int twofold_read_file(const char *path,
                                  const twofold_read_options *opts,
                                  twofold_set **out, twofold_error *err);
/* The same from an open file descriptor (not closed); name labels errors
 * (e.g. "<stdin>"). */
TWOFOLD_API int twofold_read_fd(int fd, const char *name,
                                const twofold_read_options *opts,
                                twofold_set **out, twofold_error *err);
/* The same from memory. */
TWOFOLD_API int twofold_read_memory(const void *data, size_t size,
                                    const char *name,
                                    const twofold_read_options *opts,
                                    twofold_set **out, twofold_error *err);

/* ------------------------------------------------------------------ */
/* Growth: windowed log-linear fits                                    */
/* ------------------------------------------------------------------ */
/*
 * On a window of n days of one series, fit by maximum likelihood
 *     log mu_t = a + r*t [+ w_weekday(t)] [+ offset_t]
 * with y_t ~ Poisson(mu_t) (standard errors scaled by the quasi-Poisson
 * dispersion X^2/(n-p) when the model is TWOFOLD_MODEL_QUASIPOISSON) or
 * negative binomial NB2, Var y = mu + mu^2/theta, theta by maximum
 * likelihood.  r is the growth rate per day; the doubling time is ln 2 / r.
 */

/* The count model. */
typedef enum twofold_model {
  TWOFOLD_MODEL_POISSON = 0,      /* plain Poisson likelihood            */
  TWOFOLD_MODEL_QUASIPOISSON = 1, /* Poisson fit, dispersion-scaled SEs  */
  TWOFOLD_MODEL_NEGBIN = 2        /* NB2, theta by maximum likelihood    */
} twofold_model;

/* Kinds of interval for the growth rate. */
typedef enum twofold_interval {
  TWOFOLD_INTERVAL_DEFAULT = 0, /* the library's recommended interval   */
  TWOFOLD_INTERVAL_WALD = 1,    /* r +- z * SE                          */
  TWOFOLD_INTERVAL_PROFILE = 2, /* profile likelihood                   */
  TWOFOLD_INTERVAL_SMALL = 3    /* small-sample corrected (see man page) */
} twofold_interval;

/* Window alignment for rolling estimates. */
typedef enum twofold_align {
  TWOFOLD_ALIGN_TRAILING = 0, /* day i uses days i-w+1 .. i            */
  TWOFOLD_ALIGN_CENTRED = 1   /* day i uses days i-(w-1)/2 .. i+w/2    */
} twofold_align;

/* Names of the enums and back ("poisson", "quasipoisson", "negbin";
 * "default", "wald", "profile", "small"; "trailing", "centred").  The
 * _to_string functions return NULL for unknown values, the _from_string
 * functions TWOFOLD_EINVAL for unknown names. */
TWOFOLD_API const char *twofold_model_to_string(int model);
TWOFOLD_API int twofold_model_from_string(const char *name);
TWOFOLD_API const char *twofold_interval_to_string(int kind);
TWOFOLD_API int twofold_interval_from_string(const char *name);
TWOFOLD_API const char *twofold_align_to_string(int align);
TWOFOLD_API int twofold_align_from_string(const char *name);

/* Fit options.  Defaults: model NEGBIN, level 0.95, weekday effects on,
 * interval DEFAULT, minimum events TWOFOLD_MIN_EVENTS_DEFAULT, 50
 * iterations, tolerance 1e-10. */
typedef struct twofold_fit_options twofold_fit_options;

TWOFOLD_API int twofold_fit_options_new(twofold_fit_options **out);
TWOFOLD_API void twofold_fit_options_free(twofold_fit_options *o);
TWOFOLD_API int twofold_fit_options_copy(const twofold_fit_options *o,
                                         twofold_fit_options **out);
TWOFOLD_API int twofold_fit_options_set_model(twofold_fit_options *o,
                                              int model);
TWOFOLD_API int twofold_fit_options_get_model(const twofold_fit_options *o);
/* Interval level in (0, 1). */
TWOFOLD_API int twofold_fit_options_set_level(twofold_fit_options *o,
                                              double level);
TWOFOLD_API double twofold_fit_options_get_level(
    const twofold_fit_options *o);
/* Day-of-week effects on (1) or off (0). */
TWOFOLD_API int twofold_fit_options_set_weekday(twofold_fit_options *o,
                                                int on);
TWOFOLD_API int twofold_fit_options_get_weekday(
    const twofold_fit_options *o);
/* Which interval twofold_fit_interval(fit, TWOFOLD_INTERVAL_DEFAULT, ...)
 * returns. */
TWOFOLD_API int twofold_fit_options_set_interval(twofold_fit_options *o,
                                                 int kind);
TWOFOLD_API int twofold_fit_options_get_interval(
    const twofold_fit_options *o);
/* Fewer events than this in the window gives TWOFOLD_EFEWEVENTS. */
#define TWOFOLD_MIN_EVENTS_DEFAULT 20
TWOFOLD_API int twofold_fit_options_set_min_events(twofold_fit_options *o,
                                                   double events);
TWOFOLD_API double twofold_fit_options_get_min_events(
    const twofold_fit_options *o);
TWOFOLD_API int twofold_fit_options_set_max_iterations(
    twofold_fit_options *o, int iterations);
TWOFOLD_API int twofold_fit_options_set_tolerance(twofold_fit_options *o,
                                                  double tolerance);

/* Flags describing a successful fit (bit mask). */
#define TWOFOLD_FIT_MISSING_DAYS 0x1u  /* some days in the window missing  */
#define TWOFOLD_FIT_THETA_CAPPED 0x2u  /* NB theta at its cap (Poisson-like)*/
#define TWOFOLD_FIT_LARGE_COUNTS 0x4u  /* counts large: compensated sums   */

/* A fit result, reusable across calls.  Caller frees. */
typedef struct twofold_fit twofold_fit;

TWOFOLD_API int twofold_fit_new(twofold_fit **out);
TWOFOLD_API void twofold_fit_free(twofold_fit *fit);

/* Fit the window y[0..n-1] (NaN = missing day, fitted on the days
 * present).  offset may be NULL (no offset) or hold n log-offsets.
 * first_weekday is the ISO weekday (1..7) of y[0].  Returns 0 or a status
 * such as TWOFOLD_EZERO, TWOFOLD_EFEWEVENTS, TWOFOLD_EWEEKDAY,
 * TWOFOLD_ESEPARATION, TWOFOLD_ENOCONV, TWOFOLD_ENODATA; the status is
 * also kept in the fit (twofold_fit_status) with a message
 * (twofold_fit_errmsg). */
TWOFOLD_API int twofold_growth_fit(twofold_fit *fit,
                                   const twofold_fit_options *o,
                                   const double *y, const double *offset,
                                   size_t n, int first_weekday);

TWOFOLD_API int twofold_fit_status(const twofold_fit *fit);
/* The message of the last failure ("" after success); borrowed. */
TWOFOLD_API const char *twofold_fit_errmsg(const twofold_fit *fit);
TWOFOLD_API unsigned int twofold_fit_flags(const twofold_fit *fit);
TWOFOLD_API int twofold_fit_model(const twofold_fit *fit);
/* Growth rate per day and its standard error (model-based; quasi-Poisson
 * scaled where that model is chosen). */
TWOFOLD_API double twofold_fit_rate(const twofold_fit *fit);
TWOFOLD_API double twofold_fit_rate_se(const twofold_fit *fit);
/* Interval for r of the given kind at the options' level. */
TWOFOLD_API int twofold_fit_interval(const twofold_fit *fit, int kind,
                                     double *lo, double *hi);
TWOFOLD_API double twofold_fit_level(const twofold_fit *fit);
/* Log-level a at the window's first day (weekday effects sum to zero). */
TWOFOLD_API double twofold_fit_intercept(const twofold_fit *fit);
/* Weekday effect (log scale) of ISO weekday 1..7; 0 if off. */
TWOFOLD_API double twofold_fit_weekday_effect(const twofold_fit *fit,
                                              int weekday);
/* NB theta (INFINITY for Poisson models) and the Pearson dispersion
 * X^2/(n-p). */
TWOFOLD_API double twofold_fit_theta(const twofold_fit *fit);
TWOFOLD_API double twofold_fit_dispersion(const twofold_fit *fit);
TWOFOLD_API double twofold_fit_loglik(const twofold_fit *fit);
TWOFOLD_API double twofold_fit_deviance(const twofold_fit *fit);
TWOFOLD_API int twofold_fit_iterations(const twofold_fit *fit);
TWOFOLD_API double twofold_fit_events(const twofold_fit *fit);
TWOFOLD_API size_t twofold_fit_days_used(const twofold_fit *fit);
TWOFOLD_API size_t twofold_fit_days_missing(const twofold_fit *fit);
/* Residual degrees of freedom (days used minus parameters). */
TWOFOLD_API double twofold_fit_df_residual(const twofold_fit *fit);

/* Doubling or halving time from a growth rate r and its interval
 * [r_lo, r_hi].  *sense is +1 (doubling: r > 0), -1 (halving: r < 0) or 0
 * (r == 0).  *time = ln 2 / |r| (INFINITY when r == 0).  The interval is in
 * the same sense: for doubling [ln 2 / r_hi, ln 2 / r_lo]; when r_lo <= 0
 * the upper end is INFINITY (no bound: the data are consistent with no
 * growth).  Halving mirrors this with |r|.  Times are never negative and
 * never NaN.  Any of the out pointers may be NULL. */
TWOFOLD_API int twofold_doubling_time(double r, double r_lo, double r_hi,
                                      double *time, double *time_lo,
                                      double *time_hi, int *sense);

/* Rolling window fits over a whole series y[0..n-1] (NaN = missing), with
 * windows of w days aligned as align says.  For each day i the outputs
 * (each may be NULL; else n elements, caller-owned) get the growth rate,
 * its interval of the options' default kind and the fit status (0 or a
 * TWOFOLD_E... code; rate and bounds are NaN where status != 0 or the
 * window does not fit in the series). */
TWOFOLD_API int twofold_growth_roll(const twofold_fit_options *o,
                                    const double *y, const double *offset,
                                    size_t n, int first_weekday, size_t w,
                                    int align, double *rate, double *rate_lo,
                                    double *rate_hi, int *status);


/* ------------------------------------------------------------------ */
/* Transmission: growth rate to reproduction number                    */
/* ------------------------------------------------------------------ */
/*
 * Wallinga J, Lipsitch M (2007). How generation intervals shape the
 * relationship between growth rates and reproductive numbers. Proc R Soc B
 * 274:599-604.  R = 1 / M(-r), M the moment generating function of the
 * generation-interval distribution.
 */
typedef struct twofold_gi twofold_gi;

/* A gamma generation interval by mean and standard deviation (days, both
 * > 0).  Caller frees. */
TWOFOLD_API int twofold_gi_new_gamma(double mean, double sd,
                                     twofold_gi **out);
/* A discrete generation interval: p[k] is the probability of k+1 days,
 * k = 0..n-1 (non-negative, normalised by the library).  Caller frees. */
TWOFOLD_API int twofold_gi_new_discrete(const double *p, size_t n,
                                        twofold_gi **out);
TWOFOLD_API void twofold_gi_free(twofold_gi *gi);
TWOFOLD_API double twofold_gi_mean(const twofold_gi *gi);
TWOFOLD_API double twofold_gi_sd(const twofold_gi *gi);
/* R for growth rate r (finite, per day).  TWOFOLD_ERANGE where M(-r) does
 * not exist (gamma: r <= -rate, rate = mean/sd^2) or R overflows a double;
 * *R is NaN after any failure. */
TWOFOLD_API int twofold_gi_reproduction(const twofold_gi *gi, double r,
                                        double *R);
/* R and its interval from r and r's interval (R is increasing in r).
 * Needs r_lo <= r <= r_hi, all finite (else TWOFOLD_EINVAL); TWOFOLD_ERANGE
 * if R does not exist at any of the three.  All out pointers are
 * required; they are NaN after any failure. */
TWOFOLD_API int twofold_gi_reproduction_interval(const twofold_gi *gi,
                                                 double r, double r_lo,
                                                 double r_hi, double *R,
                                                 double *R_lo, double *R_hi);


/* ------------------------------------------------------------------ */
/* Changepoints in the growth rate                                     */
/* ------------------------------------------------------------------ */
/* (declared by the changepoint module; see below) */

#ifdef __cplusplus
}
#endif

#endif /* TWOFOLD_H */
