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
/* (declared by the growth module; see below) */

/* ------------------------------------------------------------------ */
/* Transmission: growth rate to reproduction number                    */
/* ------------------------------------------------------------------ */
/* (declared by the transmission module; see below) */

/* ------------------------------------------------------------------ */
/* Changepoints in the growth rate                                     */
/* ------------------------------------------------------------------ */
/* (declared by the changepoint module; see below) */

#ifdef __cplusplus
}
#endif

#endif /* TWOFOLD_H */
