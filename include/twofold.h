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

/*
 * Input (see libtwofold(3) for the full list of rules):
 *  - RFC 4180 CSV: fields separated by commas, records by LF or CRLF; a
 *    field may be double-quoted and then hold commas, line breaks and
 *    doubled quotes ("").  A quote inside an unquoted field, text after a
 *    closing quote, a carriage return not before a line feed and a quoted
 *    field still open at the end of input are TWOFOLD_EPARSE.  The first
 *    record is the header; empty lines are skipped; the last record need
 *    not end with a line break.  A UTF-8 byte-order mark is skipped.
 *  - gzip input is recognised by its first two bytes (1f 8b) and may hold
 *    several members one after the other; a truncated or corrupt stream,
 *    or bytes after a member that are not another member, is
 *    TWOFOLD_EGZIP.
 *  - Long layout: one row per region and date.  The region column and the
 *    date column (names selectable) are required; every further column is
 *    a count column of the same name: the chosen count column (or else the
 *    first further column) becomes series column 0, the others follow in
 *    header order.
 *  - Wide layout: a date column and one column per region, the header
 *    naming the regions; each region's series has one column, named
 *    "count".  (The count-column option is not used.)
 *  - Auto layout: long if the region column exists, else wide if the date
 *    column exists, else TWOFOLD_ECOLUMN.
 *  - Dates are exactly YYYY-MM-DD and must exist (TWOFOLD_EDATE).
 *  - Counts are non-negative whole numbers written as decimal digits only,
 *    at most 2^53 (leading zeros allowed; no sign, spaces, decimal point
 *    or exponent: "12.0", "1e3", " 5" are TWOFOLD_ECOUNT).  An empty field
 *    is a missing day (NaN), as is a date the file never gives for the
 *    region: gaps are kept, never filled.  A region's series spans its
 *    first to last date given; in the wide layout every row gives its date
 *    to every region, so all regions span the file's dates.
 *  - Region order in the set: order of first appearance (wide: header
 *    order).  Rows may come in any order.
 *  - Region and column names are kept byte for byte (no trimming) and must
 *    be non-empty (TWOFOLD_EPARSE) valid UTF-8 (TWOFOLD_EENCODING); a NUL
 *    byte anywhere is TWOFOLD_EENCODING.  A column name given twice is
 *    TWOFOLD_EDUPLICATE, as is a region and date given twice.
 *  - A record whose field count differs from the header's is
 *    TWOFOLD_EFIELDS; no header is TWOFOLD_EEMPTY (line 1), a header with
 *    no data rows is TWOFOLD_EEMPTY (the header's line).
 *  - Limits (TWOFOLD_ETOOLARGE): a record longer than
 *    TWOFOLD_READ_RECORD_MAX bytes; more than TWOFOLD_READ_FIELDS_MAX
 *    fields in a record; the days spanned by all regions together above
 *    TWOFOLD_READ_SPAN_BASE + TWOFOLD_READ_SPAN_PER_ENTRY x (region-day
 *    entries read), which keeps memory proportional to the input while
 *    any single region of up to 2^21 days (over 5700 years) is accepted.
 *  - Errors: err->line is the physical line (1-based) where the offending
 *    record starts, err->column the field number (0 where not
 *    applicable: absent columns, gzip and I/O errors, size limits of a
 *    whole record); err->text reads "FILE:LINE:COLUMN: " followed by what
 *    is wrong, the column name and the offending value, double-quoted
 *    (escaped and cut to about 90 bytes).  A duplicate names the earlier
 *    line too.  The first problem in the file is reported.
 */
#define TWOFOLD_READ_RECORD_MAX (64u * 1024u * 1024u) /* bytes */
#define TWOFOLD_READ_FIELDS_MAX 1048576u
#define TWOFOLD_READ_SPAN_BASE 2097152u /* days */
#define TWOFOLD_READ_SPAN_PER_ENTRY 8u

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

/* Defaults: layout AUTO, region column "region", date column "date", no
 * chosen count column.  Caller frees. */
TWOFOLD_API int twofold_read_options_new(twofold_read_options **out);
TWOFOLD_API void twofold_read_options_free(twofold_read_options *o);
/* TWOFOLD_EINVAL for a value not in twofold_layout. */
TWOFOLD_API int twofold_read_options_set_layout(twofold_read_options *o,
                                                int layout);
/* Column names (copied; NULL or "" is TWOFOLD_EINVAL).  Defaults:
 * "region" and "date". */
TWOFOLD_API int twofold_read_options_set_region_column(
    twofold_read_options *o, const char *name);
TWOFOLD_API int twofold_read_options_set_date_column(twofold_read_options *o,
                                                     const char *name);
/* Long layout: the primary count column (default NULL: the first column
 * that is neither the region nor the date column; NULL restores it).
 * Every other column becomes a further series column of the same name.
 * A name not in the header is TWOFOLD_ECOLUMN when reading. */
TWOFOLD_API int twofold_read_options_set_count_column(
    twofold_read_options *o, const char *name);

/* Work on regions while the file is still being read: in a long-layout
 * file, fn(arg, index, s) is called once for each region the reader moves
 * on from to another, with the region's rows so far as a series s that is
 * valid only during the call (index: the region's place in the set the
 * read returns).  In a file sorted by region those rows are complete.  In
 * any other order a region can get more rows after its call, so only the
 * set the read returns counts; after the first region that does, no
 * further calls are made.  No call for wide files, for the last region,
 * or after an error.  fn is called in the reading thread; fn NULL (the
 * default) turns the calls off. */
typedef void (*twofold_read_region_fn)(void *arg, size_t index,
                                       const twofold_series *s);
TWOFOLD_API int twofold_read_options_set_region_fn(twofold_read_options *o,
                                                   twofold_read_region_fn fn,
                                                   void *arg);

/* Read a CSV file, plain or gzip-compressed (detected by its magic bytes).
 * opts may be NULL (defaults), err may be NULL.  On success *out is a new
 * set the caller frees and err->code is 0; on failure *out is NULL and
 * err says where.  A file that cannot be opened or read is TWOFOLD_EIO. */
TWOFOLD_API int twofold_read_file(const char *path,
                                  const twofold_read_options *opts,
                                  twofold_set **out, twofold_error *err);
/* The same from an open file descriptor, read to its end (not closed);
 * name labels errors (NULL: "<stdin>" for fd 0, else "<fd>"). */
TWOFOLD_API int twofold_read_fd(int fd, const char *name,
                                const twofold_read_options *opts,
                                twofold_set **out, twofold_error *err);
/* The same from memory (data is not modified; name NULL: "<memory>"). */
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
/* Iteration limit (1..100000; default 50) for each Newton loop. */
TWOFOLD_API int twofold_fit_options_set_max_iterations(
    twofold_fit_options *o, int iterations);
TWOFOLD_API int twofold_fit_options_get_max_iterations(
    const twofold_fit_options *o);
/* Convergence tolerance in (0, 1) (default 1e-10): Newton stops when the
 * Newton decrement g' H^-1 g (log-likelihood units) falls below it. */
TWOFOLD_API int twofold_fit_options_set_tolerance(twofold_fit_options *o,
                                                  double tolerance);
TWOFOLD_API double twofold_fit_options_get_tolerance(
    const twofold_fit_options *o);

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
/* NB: theta from the Cox-Reid adjusted profile likelihood, the one the
 * small-sample interval uses (NaN for Poisson models). */
TWOFOLD_API double twofold_fit_theta_adjusted(const twofold_fit *fit);
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
/*
 * Model (libtwofold(3), "Changepoints"): on day t of one series
 *     log mu_t = eta_t + delta_weekday(t),   y_t ~ Poisson(mu_t) tempered by
 * a dispersion phi >= 1 (each day's log-likelihood divided by phi), with
 * eta_t piecewise linear between changepoints.  The weekday effects delta
 * (sum to zero) and phi are estimated once per series (a Poisson fit with a
 * log-linear trend in 14-day blocks plus weekday effects; phi is a robust,
 * winsorized Pearson X^2/df, floored at 1) and held fixed in the
 * recursions.  Segment kinds:
 *   KINK  the growth rate changes, the log-level is continuous (the
 *         default: a change in transmission);
 *   JUMP  level and growth rate both free after a change (a change in
 *         reporting or case definition);
 *   LEVEL growth fixed at zero: the classical change in a constant rate.
 * Priors: the growth rate b of a segment ~ Normal(mean, sd) (default 0,
 * 0.1/day); the count level lambda (weekday-neutral mean count at the
 * segment's middle day; KINK: exp of the log-level at the series start)
 * ~ Gamma(alpha, rate beta), default alpha = 1 and beta = alpha / (the
 * series' mean count), so the prior scales with the series.  Segment
 * lengths: at least min_segment days (default 7), then negative binomial
 * with shape k (default 2; k = 1 with min_segment 1 is the geometric prior,
 * i.e. independent changes), mean 365.25 / changes_per_year days (default
 * 4 changes per year); the first segment uses the stationary length law,
 * so the prior probability of a change is the same on every day.
 * Inference: JUMP and LEVEL by the exact recursions of Fearnhead (2006,
 * Statistics and Computing 16:203-213) on segment marginal likelihoods
 * (LEVEL: exact conjugate; JUMP: exact in the level, Laplace in the growth
 * rate), with Fearnhead's pruning; KINK, whose segments share the level
 * at each change, after Fearnhead & Liu (2011, Statistics and Computing
 * 21:217-229) by default with the filtered log-level at each change
 * carried forward as one normal (a collapsed mixture, Harrison & Stevens
 * 1976, JRSS B 38:205-247) and two-dimensional Laplace segment
 * likelihoods, then the same recursions; or, on request, on a grid of
 * log-levels at each change (exact tempered Poisson likelihood between
 * grid knots, trapezoid quadrature over the knots).  Online: the particle filter of Fearnhead & Liu (2007, JRSS B
 * 69:589-605) with stratified optimal resampling.
 *
 * Day convention: a change "on day i" (0-based index in the series) means
 * day i is the first day of the new growth regime (so day 0 never carries
 * a change).
 */

/* Segment kinds. */
typedef enum twofold_cp_kind {
  TWOFOLD_CP_KINK = 0,  /* growth changes, log-level continuous        */
  TWOFOLD_CP_JUMP = 1,  /* level and growth free after a change        */
  TWOFOLD_CP_LEVEL = 2  /* growth fixed at 0: change in a constant rate */
} twofold_cp_kind;

/* "kink", "jump", "level"; NULL for an unknown value. */
TWOFOLD_API const char *twofold_cp_kind_to_string(int kind);
/* The kind named name, or TWOFOLD_EINVAL. */
TWOFOLD_API int twofold_cp_kind_from_string(const char *name);

/* Changepoint options.  Defaults are those stated above, plus: credible
 * level 0.95, pruning threshold 1e-10, up to 20 changes reported in the
 * count distribution, KINK by Laplace messages (grid 0). */
typedef struct twofold_cp_options twofold_cp_options;

/* Caller frees. */
TWOFOLD_API int twofold_cp_options_new(twofold_cp_options **out);
TWOFOLD_API void twofold_cp_options_free(twofold_cp_options *o);
/* A deep copy.  Caller frees. */
TWOFOLD_API int twofold_cp_options_copy(const twofold_cp_options *o,
                                        twofold_cp_options **out);
/* Message of the last failed setter ("" if none); borrowed. */
TWOFOLD_API const char *twofold_cp_options_errmsg(
    const twofold_cp_options *o);
/* Setters return 0, TWOFOLD_EINVAL (NULL, unknown enum value) or
 * TWOFOLD_ERANGE (value outside the stated range); getters of a NULL
 * options object return the defaults' type-appropriate zero. */
TWOFOLD_API int twofold_cp_options_set_kind(twofold_cp_options *o, int kind);
TWOFOLD_API int twofold_cp_options_get_kind(const twofold_cp_options *o);
/* Expected changes per year, > 0 and below 365.25 / min_segment; sets the
 * mean segment length to 365.25 / rate days. */
TWOFOLD_API int twofold_cp_options_set_changes_per_year(
    twofold_cp_options *o, double rate);
TWOFOLD_API double twofold_cp_options_get_changes_per_year(
    const twofold_cp_options *o);
/* The same as a per-day probability p in (0, 1/min_segment): mean segment
 * length 1/p days (the prior probability of a change on any one day). */
TWOFOLD_API int twofold_cp_options_set_change_prob(twofold_cp_options *o,
                                                   double p);
TWOFOLD_API double twofold_cp_options_get_change_prob(
    const twofold_cp_options *o);
/* Minimum segment length in days, >= 1. */
TWOFOLD_API int twofold_cp_options_set_min_segment(twofold_cp_options *o,
                                                   int days);
TWOFOLD_API int twofold_cp_options_get_min_segment(
    const twofold_cp_options *o);
/* Negative-binomial shape k of segment lengths beyond the minimum, 1..50
 * (1: geometric). */
TWOFOLD_API int twofold_cp_options_set_length_shape(twofold_cp_options *o,
                                                    int k);
TWOFOLD_API int twofold_cp_options_get_length_shape(
    const twofold_cp_options *o);
/* Normal prior of a segment's growth rate: mean (finite) and sd > 0. */
TWOFOLD_API int twofold_cp_options_set_rate_prior(twofold_cp_options *o,
                                                  double mean, double sd);
TWOFOLD_API int twofold_cp_options_get_rate_prior(
    const twofold_cp_options *o, double *mean, double *sd);
/* Gamma prior of the count level: shape alpha > 0, rate beta >= 0
 * (0: beta = alpha / mean count of the series, the default). */
TWOFOLD_API int twofold_cp_options_set_level_prior(twofold_cp_options *o,
                                                   double alpha,
                                                   double beta);
TWOFOLD_API int twofold_cp_options_get_level_prior(
    const twofold_cp_options *o, double *alpha, double *beta);
/* Dispersion phi: 0 estimates it from the series (the default); a value
 * >= 1 is used as given (1: plain Poisson). */
TWOFOLD_API int twofold_cp_options_set_dispersion(twofold_cp_options *o,
                                                  double phi);
TWOFOLD_API double twofold_cp_options_get_dispersion(
    const twofold_cp_options *o);
/* Weekday effects estimated (1, the default) or none (0). */
TWOFOLD_API int twofold_cp_options_set_weekday(twofold_cp_options *o,
                                               int on);
TWOFOLD_API int twofold_cp_options_get_weekday(const twofold_cp_options *o);
/* Pruning threshold epsilon in [0, 1e-3]; 0 is the exact, unpruned
 * recursion (cost quadratic in the length). */
TWOFOLD_API int twofold_cp_options_set_prune(twofold_cp_options *o,
                                             double epsilon);
TWOFOLD_API double twofold_cp_options_get_prune(const twofold_cp_options *o);
/* Largest number of changes in the count distribution, 0..1000. */
TWOFOLD_API int twofold_cp_options_set_max_changes(twofold_cp_options *o,
                                                   int m);
TWOFOLD_API int twofold_cp_options_get_max_changes(
    const twofold_cp_options *o);
/* Credible level in (0, 1). */
TWOFOLD_API int twofold_cp_options_set_level(twofold_cp_options *o,
                                             double level);
TWOFOLD_API double twofold_cp_options_get_level(const twofold_cp_options *o);
/* KINK method: 0 (the default) for collapsed Laplace messages, or 4..200
 * grid points per knot for the grid method (slower: its cost grows as
 * the square of the points; used to check the default). */
TWOFOLD_API int twofold_cp_options_set_grid(twofold_cp_options *o,
                                            int points);
TWOFOLD_API int twofold_cp_options_get_grid(const twofold_cp_options *o);

/* Reporting artefacts (1, the default; 0 off): before the analysis, a day
 * further than 3.5 robust standard deviations from the median of the 14
 * days around it (Hampel identifier: a backlog dump) and a zero where that
 * median is at least 10 (an unreported day) are treated as missing days.
 * twofold_changes_cleaned() counts them. */
TWOFOLD_API int twofold_cp_options_set_clean(twofold_cp_options *o, int on);
TWOFOLD_API int twofold_cp_options_get_clean(const twofold_cp_options *o);

/* A changepoint posterior for one series, reusable across runs.  Caller
 * frees. */
typedef struct twofold_changes twofold_changes;

TWOFOLD_API int twofold_changes_new(twofold_changes **out);
TWOFOLD_API void twofold_changes_free(twofold_changes *ch);

/* Largest series accepted by twofold_changes_run (days). */
#define TWOFOLD_CP_MAX_DAYS 100000

/* Compute the posterior for y[0..n-1] (NaN = missing day; counts whole
 * numbers >= 0), first_weekday the ISO weekday (1..7) of y[0].  o may be
 * NULL (defaults).  Returns 0 or TWOFOLD_EINVAL, TWOFOLD_ECOUNT,
 * TWOFOLD_ENODATA (fewer than 2 days with data), TWOFOLD_ETOOLARGE,
 * TWOFOLD_ENOMEM; the status and a message stay in ch. */
TWOFOLD_API int twofold_changes_run(twofold_changes *ch,
                                    const twofold_cp_options *o,
                                    const double *y, size_t n,
                                    int first_weekday);

/* Status of the last run and its message ("" after success); borrowed. */
TWOFOLD_API int twofold_changes_status(const twofold_changes *ch);
TWOFOLD_API const char *twofold_changes_errmsg(const twofold_changes *ch);
/* Days in the last successful run (0 if none). */
TWOFOLD_API size_t twofold_changes_length(const twofold_changes *ch);
TWOFOLD_API int twofold_changes_kind(const twofold_changes *ch);
/* The dispersion phi and the weekday effect (log scale, ISO weekday
 * 1..7, 0 when off) used by the run; NaN before a successful run. */
TWOFOLD_API double twofold_changes_dispersion(const twofold_changes *ch);
TWOFOLD_API double twofold_changes_weekday_effect(const twofold_changes *ch,
                                                  int weekday);
/* Days set missing as reporting artefacts (twofold_cp_options_set_clean). */
TWOFOLD_API size_t twofold_changes_cleaned(const twofold_changes *ch);
/* Log evidence log p(y) of the model (with phi > 1 that of the tempered
 * likelihood, which is not a probability). */
TWOFOLD_API double twofold_changes_log_evidence(const twofold_changes *ch);

/* Getters writing per-day results into caller arrays of length
 * twofold_changes_length(); any array may be NULL.  They return 0, or
 * TWOFOLD_EINVAL before a successful run. */
/* p[i] = P(day i is the first day of a new growth regime | y); p[0] = 0. */
TWOFOLD_API int twofold_changes_p_change(const twofold_changes *ch,
                                         double *p);
/* Posterior mean of the growth rate on each day and an equal-tailed
 * credible interval at the options' level (normal approximation of the
 * mixture over segments, matched to its mean and variance). */
TWOFOLD_API int twofold_changes_growth(const twofold_changes *ch,
                                       double *mean, double *lo, double *hi);
/* Doubling or halving time per day from the growth mean and interval, as
 * twofold_doubling_time() gives them (sense +1 doubling, -1 halving, 0
 * flat; INFINITY where unbounded). */
TWOFOLD_API int twofold_changes_doubling(const twofold_changes *ch,
                                         double *time, double *lo,
                                         double *hi, int *sense);
/* Posterior of the number of changes: p[m] = P(K = m | y) for m =
 * 0..size-1 (size <= max_changes + 1; the remainder P(K > max_changes)
 * goes to *tail, which may be NULL). */
TWOFOLD_API int twofold_changes_count_prob(const twofold_changes *ch,
                                           double *p, size_t size,
                                           double *tail);
/* Posterior mean of the number of changes. */
TWOFOLD_API double twofold_changes_count_mean(const twofold_changes *ch);

/* The most probable segmentation (exact for JUMP and LEVEL; KINK: the
 * most probable changes and grid levels jointly). */
TWOFOLD_API size_t twofold_changes_map_count(const twofold_changes *ch);
/* Its k-th change (k = 0..count-1): the day (first day of the new
 * regime), an interval [from, to] of days around it grown towards the
 * more probable side until the sum of p_change over it reaches the credible
 * level (never past the midpoints to the neighbouring changes), and *prob,
 * that sum capped at 1: the probability of a change in the interval when
 * the interval is shorter than the minimum segment length (at most one
 * change fits), otherwise the expected number of changes in it.  Any out
 * pointer may be NULL.  TWOFOLD_ENOTFOUND if k is out of range. */
TWOFOLD_API int twofold_changes_map_change(const twofold_changes *ch,
                                           size_t k, size_t *day,
                                           size_t *from, size_t *to,
                                           double *prob);
/* Its k-th segment (k = 0..count): first and last day, the posterior mean
 * growth rate and credible interval given this segmentation (KINK: the
 * per-day posterior at the segment's middle day), and the posterior mean
 * count level (weekday-neutral, at the middle day).  Any out pointer may
 * be NULL.  TWOFOLD_ENOTFOUND if k is out of range. */
TWOFOLD_API int twofold_changes_map_segment(const twofold_changes *ch,
                                            size_t k, size_t *start,
                                            size_t *end, double *rate,
                                            double *rate_lo, double *rate_hi,
                                            double *level);

/* Free the memory kept only for twofold_changes_sample (the candidate
 * segments of the recursions: a few MB for a two-year series), for callers
 * that hold many posteriors at once (without it, the next run of the same
 * object reuses those buffers, for any segment kind but kink by the grid
 * method).  Every other getter
 * keeps working; twofold_changes_sample then gives TWOFOLD_EINVAL until
 * the next run. */
TWOFOLD_API int twofold_changes_shrink(twofold_changes *ch);

/* Draw `draws` segmentations from the posterior (exact sampling from the
 * recursions; KINK with a grid: on the level grid), seeded by seed (same seed, same
 * draws).  change (draws x n, row-major, may be NULL) gets 1 where day i
 * starts a new regime in draw d, else 0; rate (draws x n, may be NULL)
 * the growth rate of day i in draw d; count (draws, may be NULL) the
 * number of changes.  Caller-owned arrays. */
TWOFOLD_API int twofold_changes_sample(const twofold_changes *ch,
                                       uint64_t seed, size_t draws,
                                       unsigned char *change, double *rate,
                                       size_t *count);

/* Building blocks, for checks and for callers combining segments: the log
 * marginal likelihood of days start..end as one segment (JUMP, LEVEL;
 * without the terms common to every segmentation, see libtwofold(3)), and
 * the log prior probability of a segment of length len (first: the first
 * segment) ending (*log_pmf) or lasting at least len days (*log_surv).
 * TWOFOLD_EINVAL for KINK or before a run, TWOFOLD_ERANGE for days out of
 * range. */
TWOFOLD_API int twofold_changes_segment_logml(const twofold_changes *ch,
                                              size_t start, size_t end,
                                              double *logml);
TWOFOLD_API int twofold_changes_length_prior(const twofold_changes *ch,
                                             size_t len, int first,
                                             double *log_pmf,
                                             double *log_surv);

/* Online filter (Fearnhead & Liu 2007) for KINK, JUMP and LEVEL segments
 * (KINK by the collapsed Laplace messages of the offline default, whatever
 * the grid option says).
 * history[0..n_history-1] (may be NULL with n_history 0) estimates the
 * weekday effects, the dispersion (when the options ask for it; without
 * history phi = 1) and the level prior scale as the offline run would, and
 * is fed to the filter; first_weekday is the ISO weekday of the first day
 * (of the history, or of the first added day).  At most max_candidates
 * (>= 2) candidate last changes are kept, reduced by stratified optimal
 * resampling seeded by seed.  o may be NULL (the defaults: KINK
 * segments).  Without resampling the filter's evidence and recent-change
 * probabilities are those of the offline run with pruning off.  Artefact
 * cleaning is not
 * applied online (it needs days on both sides).  Caller frees. */
typedef struct twofold_online twofold_online;

TWOFOLD_API int twofold_online_new(const twofold_cp_options *o,
                                   const double *history, size_t n_history,
                                   int first_weekday, size_t max_candidates,
                                   uint64_t seed, twofold_online **out);
TWOFOLD_API void twofold_online_free(twofold_online *on);
TWOFOLD_API const char *twofold_online_errmsg(const twofold_online *on);
/* Add the next day's count (NaN = missing). */
TWOFOLD_API int twofold_online_add(twofold_online *on, double y);
/* Days added so far (history included) and candidates kept. */
TWOFOLD_API size_t twofold_online_days(const twofold_online *on);
TWOFOLD_API size_t twofold_online_candidates(const twofold_online *on);
/* P(a new regime started within the last k days | data so far), k >= 1
 * (k = 1: today is the first day of a new regime). */
TWOFOLD_API int twofold_online_p_recent(const twofold_online *on, size_t k,
                                        double *p);
/* Growth rate today: posterior mean and credible interval (normal
 * approximation of the mixture). */
TWOFOLD_API int twofold_online_growth(const twofold_online *on, double *mean,
                                      double *lo, double *hi);
/* log p(y_t | y_1..t-1) of the last day added (NaN if none; -inf when the
 * day is impossible under every candidate, the filter then starting again
 * at that day). */
TWOFOLD_API double twofold_online_log_predictive(const twofold_online *on);

#ifdef __cplusplus
}
#endif

#endif /* TWOFOLD_H */
