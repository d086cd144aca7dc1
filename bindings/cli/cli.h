/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * cli.h - the scaffold shared by the twofold commands (twofold,
 * twofold-breaks, twofold-alert): messages, exit statuses, option helpers,
 * reading input files, and a record writer for aligned tables, TSV, CSV
 * and JSON Lines with all-or-nothing --output files.
 *
 * Everything here belongs to the commands, not to libtwofold: it prints,
 * exits and keeps per-process state (the program name, the temporary
 * output file to remove on a signal).
 */
#ifndef TWOFOLD_CLI_H
#define TWOFOLD_CLI_H

#include "twofold.h"

#include <getopt.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

/* Exit statuses shared by the commands (each man page lists them). */
enum {
  TF_EXIT_OK = 0,     /* success                                         */
  TF_EXIT_DATA = 1,   /* input read, but a requested region, column or
                         date is not in it                               */
  TF_EXIT_USAGE = 2,  /* bad option or argument                          */
  TF_EXIT_INPUT = 3,  /* an input file cannot be read or is malformed    */
  TF_EXIT_OUTPUT = 4  /* output cannot be written, or out of memory      */
};

/* ------------------------------------------------------------------ */
/* Messages                                                            */
/* ------------------------------------------------------------------ */

/* Set the name messages are prefixed with (a fixed string such as
 * "twofold", so messages do not depend on how the program was started). */
void tf_cli_set_program(const char *name);
const char *tf_cli_program(void);
/* "PROGRAM: message\n" on stderr. */
void tf_cli_msg(const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 1, 2)))
#endif
    ;
/* A usage error: the message, then "Try 'PROGRAM --help'."; returns
 * TF_EXIT_USAGE so callers can write  return tf_cli_usage_error(...); */
int tf_cli_usage_error(const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 1, 2)))
#endif
    ;
/* "PROGRAM X.Y.Z" on stdout (the version from twofold_version_string()),
 * as --version prints it. */
int tf_cli_print_version(void);

/* The getopt results every command treats alike: 'h' (usage(stdout), which
 * returns 0 or an exit status), 'V' (the version), ':' (an option without
 * its argument) and anything else (an unknown or ambiguous option, named
 * from argv and optind).  Returns the exit status. */
int tf_cli_other_option(int c, int (*usage)(FILE *), char *const *argv);

/* A column or region name from option opt: an empty one is a usage error
 * (what: "column" or "region").  Returns 0 or TF_EXIT_USAGE. */
int tf_cli_parse_name(const char *opt, const char *what, const char *arg,
                      const char **out);

/* ------------------------------------------------------------------ */
/* Parsing option arguments                                            */
/* ------------------------------------------------------------------ */
/* Each returns 0 on success; otherwise it prints a usage message naming
 * the option and returns TF_EXIT_USAGE. */

/* A whole decimal number in [min, max]. */
int tf_cli_parse_long(const char *opt, const char *arg, long min, long max,
                      long *out);
/* A finite number in the open interval (min, max). */
int tf_cli_parse_double_open(const char *opt, const char *arg, double min,
                             double max, double *out);
/* Two positive finite numbers "A,B". */
int tf_cli_parse_pair(const char *opt, const char *arg, double *a,
                      double *b);
/* An ISO 8601 date "YYYY-MM-DD". */
int tf_cli_parse_date(const char *opt, const char *arg, int32_t *day);

/* ------------------------------------------------------------------ */
/* Input                                                               */
/* ------------------------------------------------------------------ */

/* The input options every command takes: the count column, the layout,
 * the region and date column names, the regions to report and
 * --no-total.  Each command adds TF_INPUT_LONG_OPTIONS to its getopt_long
 * table and TF_INPUT_SHORT_OPTIONS to its option string. */
typedef struct tf_cli_input {
  const char *count;                      /* NULL: the first count column */
  int layout;                             /* TWOFOLD_LAYOUT_...          */
  const char *region_column, *date_column; /* NULL: the library's default */
  const char **regions;                   /* room for argc names         */
  size_t nregions;
  int no_total;
} tf_cli_input;

/* Option codes of the shared long options without a short form (above
 * any command's own codes). */
enum { TF_OPT_LAYOUT = 400, TF_OPT_REGION_COLUMN, TF_OPT_DATE_COLUMN,
       TF_OPT_NO_TOTAL };

#define TF_INPUT_LONG_OPTIONS                                                \
  {"count", required_argument, NULL, 'c'},                                   \
      {"layout", required_argument, NULL, TF_OPT_LAYOUT},                    \
      {"region-column", required_argument, NULL, TF_OPT_REGION_COLUMN},      \
      {"date-column", required_argument, NULL, TF_OPT_DATE_COLUMN},          \
      {"region", required_argument, NULL, 'r'},                              \
      {"no-total", no_argument, NULL, TF_OPT_NO_TOTAL}
#define TF_INPUT_SHORT_OPTIONS "c:r:"

/* Set the defaults (regions: room for nargs names).  0, or TF_EXIT_OUTPUT
 * after a message (out of memory). */
int tf_cli_input_init(tf_cli_input *in, int nargs);
void tf_cli_input_free(tf_cli_input *in);

/* Handle option c with argument arg if it is a shared input option:
 * returns -1 when it is not one, 0 when handled, or TF_EXIT_USAGE after a
 * message naming the option and the value (an empty name, which no input
 * can hold, or an unknown layout). */
int tf_cli_input_option(int c, const char *arg, tf_cli_input *in);

/* The index of column name in s (*col), or TF_EXIT_DATA after the
 * message "region 'R' has no column 'NAME'". */
int tf_cli_series_column(const twofold_series *s, const char *name,
                         size_t *col);

/* Help lines of the shared options: -r and --no-total (label names the
 * sum), and the "Input:" block. */
void tf_cli_input_help_regions(FILE *f, const char *label);
void tf_cli_input_help(FILE *f);

/* New reader options from in (the caller frees them).  0, TF_EXIT_USAGE
 * (a value the library refuses; its message is printed) or
 * TF_EXIT_OUTPUT (out of memory, message printed). */
int tf_cli_input_read_options(const tf_cli_input *in,
                              twofold_read_options **out);

/* Read every path (at least one; "-" is standard input, at most once)
 * with the reader options and merge the regions into one new set, which
 * the caller frees.  Returns TF_EXIT_OK, or TF_EXIT_INPUT (a region in two
 * files, an unreadable or malformed file; the library's message, which
 * names FILE:LINE:COLUMN and the value, is printed as it is) or
 * TF_EXIT_OUTPUT (out of memory). */
int tf_cli_read_inputs(char *const *paths, size_t npaths,
                       const twofold_read_options *ro, twofold_set **out);

/* The series to report, as every command chooses them: the nregions
 * named regions in the order given (label names the sum over all
 * regions), or with none named every region in input order, then the sum
 * unless no_total.  *total receives the sum when it is built (the caller
 * frees it), *out an array of the *n series (the caller frees it).
 * TF_EXIT_OK, TF_EXIT_DATA (a named region is absent, a region is called
 * label, or the regions cannot be summed) or TF_EXIT_OUTPUT (out of
 * memory), after a message. */
int tf_cli_select_series(const twofold_set *set, const char *label,
                         const char *const *regions, size_t nregions,
                         int no_total, twofold_series **total,
                         const twofold_series ***out, size_t *n);

/* The targets of a command: the series of tf_cli_select_series, each
 * turned into an element of elem_size bytes (zeroed first) by
 * resolve(ctx, series, element), which returns TF_EXIT_OK or an exit
 * status after a message.  *out gets the array of the *n elements (the
 * caller frees it), *total as tf_cli_select_series. */
typedef int (*tf_cli_resolve_fn)(const void *ctx, const twofold_series *s,
                                 void *element);
int tf_cli_targets(const twofold_set *set, const char *label,
                   const char *const *regions, size_t nregions, int no_total,
                   twofold_series **total, size_t elem_size,
                   tf_cli_resolve_fn resolve, const void *ctx, void **out,
                   size_t *n);

/* ------------------------------------------------------------------ */
/* Records: tables, TSV, CSV, JSON Lines                               */
/* ------------------------------------------------------------------ */

typedef enum tf_format {
  TF_FORMAT_TABLE = 0, /* aligned columns for people (the default)        */
  TF_FORMAT_TSV = 1,   /* tab-separated, a header line, \t \n \r \\ escaped */
  TF_FORMAT_CSV = 2,   /* comma-separated, header, RFC 4180 quoting        */
  TF_FORMAT_JSON = 3   /* JSON Lines: one object per record               */
} tf_format;

/* "table", "tsv", "csv", "json" and back (-1 for an unknown name). */
const char *tf_format_name(int format);
int tf_format_from_name(const char *name);

typedef enum tf_cell_kind {
  TF_CELL_NULL = 0, /* no value: "-" in tables, empty in TSV/CSV, null   */
  TF_CELL_STR,      /* text (UTF-8)                                      */
  TF_CELL_INT,      /* whole number                                      */
  TF_CELL_DBL,      /* number; NaN is a null, +-INFINITY "inf"/"-inf" in
                       tables, TSV and CSV and null in JSON              */
  TF_CELL_DATE      /* day number, written YYYY-MM-DD                    */
} tf_cell_kind;

typedef struct tf_cell {
  int kind;
  /* For TF_CELL_DBL: decimals in tables, TSV and CSV (JSON always writes
   * the shortest text that reads back as the same double).  A negative
   * value writes the shortest round-trip text in every format. */
  int prec;
  /* For TF_CELL_DBL in tables, TSV and CSV: 1 to write the sign of every
   * non-zero number, even where it rounds to zero ("+0.0", "-0.0"). */
  int plus;
  const char *s;
  long long i;
  double d;
  int32_t day;
} tf_cell;

/* Cell constructors. */
tf_cell tf_cell_null(void);
tf_cell tf_cell_str(const char *s); /* NULL gives a null cell */
/* "doubling" for sense > 0, "halving" for sense < 0, a null cell for 0 (no
 * finite time: the rate is 0 or unknown) */
tf_cell tf_cell_sense(int sense);
tf_cell tf_cell_int(long long i);
tf_cell tf_cell_dbl(double d, int prec);
tf_cell tf_cell_dbl_signed(double d, int prec); /* with a '+' */
tf_cell tf_cell_date(int32_t day);

/* Column alignment in tables. */
enum { TF_ALIGN_LEFT = 0, TF_ALIGN_RIGHT = 1 };

typedef struct tf_column {
  const char *name; /* header and JSON key                                */
  int align;        /* TF_ALIGN_LEFT or TF_ALIGN_RIGHT (tables only)      */
} tf_column;

typedef struct tf_writer tf_writer;

/* A writer of records with the given columns (the array and names are
 * borrowed and must outlive the writer) to out.  Tables are held until
 * tf_writer_finish() to measure the columns; the other formats stream.
 * NULL when out of memory. */
tf_writer *tf_writer_new(FILE *out, int format, const tf_column *cols,
                         size_t ncols);
/* Write one record of ncols cells (copied).  0, or -1 on a write error or
 * out of memory (errno says which). */
int tf_writer_row(tf_writer *w, const tf_cell *cells);
/* Write what is held (tables) and flush.  0 or -1 as above. */
int tf_writer_finish(tf_writer *w);
void tf_writer_free(tf_writer *w);

/* ------------------------------------------------------------------ */
/* Output files written whole or not at all                            */
/* ------------------------------------------------------------------ */

typedef struct tf_output tf_output;

/* Open the output: path NULL or "-" is standard output; otherwise a new
 * temporary file in path's folder (mkstemp), renamed over path only by
 * tf_output_commit().  Prints a message and returns NULL on failure. */
tf_output *tf_output_open(const char *path);
FILE *tf_output_stream(tf_output *o);
/* Flush, fsync and rename the temporary file over the target (or flush
 * standard output).  Frees o.  Returns TF_EXIT_OK or, after printing a
 * message and removing the temporary file, TF_EXIT_OUTPUT. */
int tf_output_commit(tf_output *o);
/* Remove the temporary file; an existing target is never touched.  Frees
 * o; accepts NULL. */
void tf_output_abort(tf_output *o);

/* The end of a command's output.  st is TF_EXIT_OK, -1 (a write failed,
 * errno says why) or another exit status.  With TF_EXIT_OK, finishes w
 * (NULL: nothing to finish) and commits *out, which is then NULL; a failed
 * write is reported, naming path (NULL or "-": standard output).  Returns
 * the exit status; the caller still aborts *out (a no-op once NULL). */
int tf_output_end(tf_output **out, tf_writer *w, int st, const char *path);

/* ------------------------------------------------------------------ */
/* Small helpers                                                       */
/* ------------------------------------------------------------------ */

/* A finite number with prec decimals (prec < 0: the shortest text that
 * reads back exactly); if plus, the sign of every non-zero number, even
 * where it rounds to zero; "inf" and "-inf" for infinities, "-" for NaN.
 * Zero, and without plus a negative number that rounds to zero, is
 * written unsigned.
 * out holds >= 32 bytes. */
const char *tf_cli_format_number(char *out, size_t size, double v, int prec,
                                 int plus);

/* "LO..HI" from tf_cli_format_number(prec, plus) of both ends, in out
 * (>= 70 bytes); NULL (a table shows "-") if either end is NaN. */
const char *tf_cli_range_text(char *out, size_t size, double lo, double hi,
                              int prec, int plus);

/* The header of an interval column, "95% CI" for level 0.95, in out
 * (>= 40 bytes). */
void tf_cli_ci_header(char *out, size_t size, double level);

/* A status code's short lower-case name: "ok" for 0, "fewevents" for
 * TWOFOLD_EFEWEVENTS (from twofold_err_name()).  buf holds >= 32 bytes. */
const char *tf_cli_status_name(int code, char *buf, size_t size);

#endif
