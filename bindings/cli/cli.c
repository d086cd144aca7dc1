/* SPDX-License-Identifier: GPL-3.0-or-later */
/* The scaffold shared by the twofold commands; see cli.h. */
#include "cli.h"

#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <limits.h>
#include <math.h>
#include <signal.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

/* ------------------------------------------------------------------ */
/* Messages                                                            */
/* ------------------------------------------------------------------ */

static const char *program_name = "twofold";

void tf_cli_set_program(const char *name) { program_name = name; }
const char *tf_cli_program(void) { return program_name; }

static void vmsg(const char *fmt, va_list ap) {
  fprintf(stderr, "%s: ", program_name);
  vfprintf(stderr, fmt, ap);
  fputc('\n', stderr);
}

void tf_cli_msg(const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  vmsg(fmt, ap);
  va_end(ap);
}

int tf_cli_usage_error(const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  vmsg(fmt, ap);
  va_end(ap);
  fprintf(stderr, "Try '%s --help' for more information.\n", program_name);
  return TF_EXIT_USAGE;
}

int tf_cli_print_version(void) {
  printf("%s %s\n", program_name, twofold_version_string());
  if (fflush(stdout) != 0 || ferror(stdout)) {
    tf_cli_msg("cannot write to standard output: %s", strerror(errno));
    return TF_EXIT_OUTPUT;
  }
  return TF_EXIT_OK;
}

int tf_cli_other_option(int c, int (*usage)(FILE *), char *const *argv) {
  int st;
  switch (c) {
  case 'h':
    if ((st = usage(stdout)) != 0)
      return st;
    if (fflush(stdout) != 0 || ferror(stdout)) {
      tf_cli_msg("cannot write to standard output");
      return TF_EXIT_OUTPUT;
    }
    return TF_EXIT_OK;
  case 'V':
    return tf_cli_print_version();
  case ':':
    if (strncmp(argv[optind - 1], "--", 2) == 0)
      return tf_cli_usage_error("option %s needs an argument",
                                argv[optind - 1]);
    return tf_cli_usage_error("option -%c needs an argument", optopt);
  default:
    if (strncmp(argv[optind - 1], "--", 2) == 0)
      return tf_cli_usage_error("unknown or ambiguous option %s",
                                argv[optind - 1]);
    return tf_cli_usage_error("unknown option -%c", optopt);
  }
}

/* ------------------------------------------------------------------ */
/* Option arguments                                                    */
/* ------------------------------------------------------------------ */

int tf_cli_parse_long(const char *opt, const char *arg, long min, long max,
                      long *out) {
  char *end;
  errno = 0;
  long v = strtol(arg, &end, 10);
  if (arg[0] == '\0' || *end != '\0' || errno == ERANGE)
    return tf_cli_usage_error("%s: not a whole number: '%s'", opt, arg);
  if (v < min || v > max)
    return tf_cli_usage_error("%s: %ld is outside %ld..%ld", opt, v, min,
                              max);
  *out = v;
  return 0;
}

static int parse_finite(const char *arg, const char **endp, double *out) {
  char *end;
  errno = 0;
  double v = strtod(arg, &end);
  if (end == arg || errno == ERANGE || !isfinite(v))
    return -1;
  *endp = end;
  *out = v;
  return 0;
}

int tf_cli_parse_double_open(const char *opt, const char *arg, double min,
                             double max, double *out) {
  const char *end;
  double v;
  if (parse_finite(arg, &end, &v) != 0 || *end != '\0')
    return tf_cli_usage_error("%s: not a number: '%s'", opt, arg);
  if (!(v > min && v < max))
    return tf_cli_usage_error("%s: %s is not strictly between %g and %g",
                              opt, arg, min, max);
  *out = v;
  return 0;
}

int tf_cli_parse_pair(const char *opt, const char *arg, double *a,
                      double *b) {
  const char *end;
  double x, y;
  if (parse_finite(arg, &end, &x) != 0 || *end != ',' ||
      parse_finite(end + 1, &end, &y) != 0 || *end != '\0')
    return tf_cli_usage_error("%s: expected two numbers A,B: '%s'", opt,
                              arg);
  if (!(x > 0) || !(y > 0))
    return tf_cli_usage_error("%s: both numbers must be positive: '%s'",
                              opt, arg);
  *a = x;
  *b = y;
  return 0;
}

int tf_cli_parse_date(const char *opt, const char *arg, int32_t *day) {
  if (twofold_date_parse(arg, strlen(arg), day) != 0)
    return tf_cli_usage_error("%s: not a date YYYY-MM-DD: '%s'", opt, arg);
  return 0;
}

/* ------------------------------------------------------------------ */
/* Input                                                               */
/* ------------------------------------------------------------------ */

static int read_one(const char *path, const twofold_read_options *ro,
                    twofold_set **out) {
  twofold_error err;
  memset(&err, 0, sizeof err);
  int rc;
  if (strcmp(path, "-") == 0)
    rc = twofold_read_fd(STDIN_FILENO, "<stdin>", ro, out, &err);
  else
    rc = twofold_read_file(path, ro, out, &err);
  if (rc == 0)
    return TF_EXIT_OK;
  if (err.text[0] != '\0')
    tf_cli_msg("%s", err.text);
  else
    tf_cli_msg("%s: %s", strcmp(path, "-") == 0 ? "<stdin>" : path,
               twofold_strerror(rc));
  return rc == TWOFOLD_ENOMEM ? TF_EXIT_OUTPUT : TF_EXIT_INPUT;
}

/* ------------------------------------------------------------------ */
/* The shared input options                                            */
/* ------------------------------------------------------------------ */

int tf_cli_input_init(tf_cli_input *in, int nargs) {
  memset(in, 0, sizeof *in);
  in->layout = TWOFOLD_LAYOUT_AUTO;
  in->regions = calloc(nargs > 0 ? (size_t)nargs : 1, sizeof *in->regions);
  if (in->regions == NULL) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  return 0;
}

void tf_cli_input_free(tf_cli_input *in) {
  free(in->regions);
  in->regions = NULL;
}

/* A column or region name: the reader refuses empty column and region
 * names in a file, so an empty one here could never match. */
int tf_cli_parse_name(const char *opt, const char *what, const char *arg,
                      const char **out) {
  if (arg[0] == '\0')
    return tf_cli_usage_error("%s: '%s' is not a %s name", opt, arg, what);
  *out = arg;
  return 0;
}

int tf_cli_input_option(int c, const char *arg, tf_cli_input *in) {
  switch (c) {
  case 'c':
    return tf_cli_parse_name("--count", "column", arg, &in->count);
  case TF_OPT_LAYOUT:
    if ((in->layout = twofold_layout_from_string(arg)) < 0)
      return tf_cli_usage_error("--layout: '%s' is not auto, long or wide",
                                arg);
    return 0;
  case TF_OPT_REGION_COLUMN:
    return tf_cli_parse_name("--region-column", "column", arg, &in->region_column);
  case TF_OPT_DATE_COLUMN:
    return tf_cli_parse_name("--date-column", "column", arg, &in->date_column);
  case 'r':
    return tf_cli_parse_name("--region", "region", arg,
                      &in->regions[in->nregions++]);
  case TF_OPT_NO_TOTAL:
    in->no_total = 1;
    return 0;
  default:
    return -1;
  }
}

int tf_cli_series_column(const twofold_series *s, const char *name,
                         size_t *col) {
  int k = twofold_series_column_index(s, name);
  if (k < 0) {
    tf_cli_msg("region '%s' has no column '%s'", twofold_series_region(s),
               name);
    return TF_EXIT_DATA;
  }
  *col = (size_t)k;
  return TF_EXIT_OK;
}

void tf_cli_input_help_regions(FILE *f, const char *label) {
  fprintf(f,
          "  -r, --region=NAME          only this region (repeatable; %s "
          "names\n"
          "                             the sum)\n"
          "      --no-total             leave out the sum over regions\n",
          label);
}

void tf_cli_input_help(FILE *f) {
  fputs("Input:\n"
        "  -c, --count=COLUMN         count column to use (default: the "
        "first)\n"
        "      --layout=LAYOUT        auto, long or wide (default auto)\n"
        "      --region-column=NAME   region column of long files (default "
        "region)\n"
        "      --date-column=NAME     date column (default date)\n",
        f);
}

int tf_cli_input_read_options(const tf_cli_input *in,
                              twofold_read_options **out) {
  twofold_read_options *ro = NULL;
  *out = NULL;
  int rc = twofold_read_options_new(&ro);
  if (rc == 0)
    rc = twofold_read_options_set_layout(ro, in->layout);
  if (rc == 0 && in->region_column)
    rc = twofold_read_options_set_region_column(ro, in->region_column);
  if (rc == 0 && in->date_column)
    rc = twofold_read_options_set_date_column(ro, in->date_column);
  if (rc != 0) {
    twofold_read_options_free(ro);
    if (rc == TWOFOLD_ENOMEM) {
      tf_cli_msg("out of memory");
      return TF_EXIT_OUTPUT;
    }
    return tf_cli_usage_error("%s", twofold_strerror(rc));
  }
  *out = ro;
  return 0;
}

int tf_cli_read_inputs(char *const *paths, size_t npaths,
                       const twofold_read_options *ro, twofold_set **out) {
  *out = NULL;
  if (npaths == 1)
    return read_one(paths[0], ro, out);
  twofold_set *all = NULL;
  if (twofold_set_new(&all) != 0) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  for (size_t k = 0; k < npaths; k++) {
    twofold_set *one = NULL;
    int st = read_one(paths[k], ro, &one);
    if (st != TF_EXIT_OK) {
      twofold_set_free(all);
      return st;
    }
    for (size_t i = 0; i < twofold_set_count(one); i++) {
      const twofold_series *s = twofold_set_at(one, i);
      const char *region = twofold_series_region(s);
      if (twofold_set_find(all, region) != NULL) {
        tf_cli_msg("%s: region '%s' is also in an earlier input file",
                   strcmp(paths[k], "-") == 0 ? "<stdin>" : paths[k],
                   region);
        twofold_set_free(one);
        twofold_set_free(all);
        return TF_EXIT_INPUT;
      }
      twofold_series *copy = NULL;
      if (twofold_series_copy(s, &copy) != 0 ||
          twofold_set_add(all, copy) != 0) {
        twofold_series_free(copy);
        twofold_set_free(one);
        twofold_set_free(all);
        tf_cli_msg("out of memory");
        return TF_EXIT_OUTPUT;
      }
    }
    twofold_set_free(one);
  }
  *out = all;
  return TF_EXIT_OK;
}

int tf_cli_select_series(const twofold_set *set, const char *label,
                         const char *const *regions, size_t nregions,
                         int no_total, twofold_series **total,
                         const twofold_series ***out, size_t *n) {
  size_t count = twofold_set_count(set);
  *total = NULL;
  *out = NULL;
  *n = 0;
  if (twofold_set_find(set, label) != NULL) {
    tf_cli_msg("a region in the input is called '%s', the label of the sum "
               "over regions",
               label);
    return TF_EXIT_DATA;
  }
  int want_total = !no_total && nregions == 0;
  for (size_t i = 0; i < nregions; i++) {
    if (strcmp(regions[i], label) == 0)
      want_total = 1;
    else if (twofold_set_find(set, regions[i]) == NULL) {
      tf_cli_msg("no region '%s' in the input", regions[i]);
      return TF_EXIT_DATA;
    }
  }
  if (want_total && count > 0) {
    int rc = twofold_set_total(set, label, total);
    if (rc != 0) {
      tf_cli_msg("cannot sum the regions: %s", twofold_strerror(rc));
      return rc == TWOFOLD_ENOMEM ? TF_EXIT_OUTPUT : TF_EXIT_DATA;
    }
  }
  size_t cap = (nregions ? nregions : count) + 1;
  const twofold_series **s = calloc(cap, sizeof *s);
  if (s == NULL) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  size_t k = 0;
  if (nregions == 0) {
    for (size_t i = 0; i < count; i++)
      s[k++] = twofold_set_at(set, i);
    if (*total != NULL)
      s[k++] = *total;
  } else {
    for (size_t i = 0; i < nregions; i++) {
      const twofold_series *one = strcmp(regions[i], label) == 0
                                      ? *total
                                      : twofold_set_find(set, regions[i]);
      if (one != NULL)
        s[k++] = one;
    }
  }
  *out = s;
  *n = k;
  return TF_EXIT_OK;
}

int tf_cli_targets(const twofold_set *set, const char *label,
                   const char *const *regions, size_t nregions, int no_total,
                   twofold_series **total, size_t elem_size,
                   tf_cli_resolve_fn resolve, const void *ctx, void **out,
                   size_t *n) {
  const twofold_series **list = NULL;
  size_t m = 0;
  *out = NULL;
  *n = 0;
  int st = tf_cli_select_series(set, label, regions, nregions, no_total,
                                total, &list, &m);
  if (st != TF_EXIT_OK)
    return st;
  unsigned char *t = calloc(m ? m : 1, elem_size);
  if (t == NULL) {
    free(list);
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  for (size_t i = 0; i < m && st == TF_EXIT_OK; i++)
    st = resolve(ctx, list[i], t + i * elem_size);
  free(list);
  if (st != TF_EXIT_OK) {
    free(t);
    return st;
  }
  *out = t;
  *n = m;
  return TF_EXIT_OK;
}

/* ------------------------------------------------------------------ */
/* Cells                                                               */
/* ------------------------------------------------------------------ */

tf_cell tf_cell_null(void) {
  tf_cell c;
  memset(&c, 0, sizeof c);
  c.kind = TF_CELL_NULL;
  return c;
}

tf_cell tf_cell_str(const char *s) {
  tf_cell c = tf_cell_null();
  if (s != NULL) {
    c.kind = TF_CELL_STR;
    c.s = s;
  }
  return c;
}

tf_cell tf_cell_sense(int sense) {
  return tf_cell_str(sense > 0 ? "doubling" : sense < 0 ? "halving" : NULL);
}

tf_cell tf_cell_int(long long i) {
  tf_cell c = tf_cell_null();
  c.kind = TF_CELL_INT;
  c.i = i;
  return c;
}

tf_cell tf_cell_dbl(double d, int prec) {
  tf_cell c = tf_cell_null();
  c.kind = TF_CELL_DBL;
  c.d = d;
  c.prec = prec;
  return c;
}

tf_cell tf_cell_dbl_signed(double d, int prec) {
  tf_cell c = tf_cell_dbl(d, prec);
  c.plus = 1;
  return c;
}

tf_cell tf_cell_date(int32_t day) {
  tf_cell c = tf_cell_null();
  c.kind = TF_CELL_DATE;
  c.day = day;
  return c;
}

/* ------------------------------------------------------------------ */
/* A growable byte buffer                                              */
/* ------------------------------------------------------------------ */

typedef struct buf {
  char *p;
  size_t n, cap;
  int failed;
} buf;

static void buf_grow(buf *b, size_t extra) {
  if (b->failed)
    return;
  if (b->n + extra + 1 <= b->cap)
    return;
  size_t cap = b->cap ? b->cap : 64;
  while (cap < b->n + extra + 1) {
    if (cap > SIZE_MAX / 2) {
      b->failed = 1;
      return;
    }
    cap *= 2;
  }
  char *p = realloc(b->p, cap);
  if (p == NULL) {
    b->failed = 1;
    return;
  }
  b->p = p;
  b->cap = cap;
}

static void buf_add(buf *b, const char *s, size_t len) {
  buf_grow(b, len);
  if (b->failed)
    return;
  memcpy(b->p + b->n, s, len);
  b->n += len;
  b->p[b->n] = '\0';
}

static void buf_puts(buf *b, const char *s) { buf_add(b, s, strlen(s)); }
static void buf_putc(buf *b, char c) { buf_add(b, &c, 1); }

/* ------------------------------------------------------------------ */
/* Formatting values                                                   */
/* ------------------------------------------------------------------ */

/* The shortest %.Ng text (N = 1..17) that reads back as v exactly.
 * C11's strtod is correctly rounded on glibc, so this is exact. */
static int round_trips(char *out, size_t size, int p, double v) {
  snprintf(out, size, "%.*g", p, v);
  return strtod(out, NULL) == v;
}

/* The fewest significant digits (1..17) that read back as v.  Away from
 * powers of two, reading back is monotone in the digits (p + 1 correctly
 * rounded digits are at least as close to v as p digits, and v's rounding
 * interval is symmetric), so a bisection finds the same count as trying
 * 1, 2, ... in turn; at a power of two the interval is lopsided and the
 * digits are tried in turn. */
static void fmt_shortest(char *out, size_t size, double v) {
  int e;
  if (frexp(v, &e) == 0.5 || frexp(v, &e) == -0.5 || v == 0) {
    for (int p = 1; p <= 17; p++)
      if (round_trips(out, size, p, v))
        break;
  } else {
    /* Most doubles from a fit need 16 or 17 digits: try those first, then
     * bisect what is left (the same count as bisecting 1..17). */
    int lo = 1, hi = 17, held = 0; /* held: the digits now in out */
    held = 16;
    if (!round_trips(out, size, 16, v))
      lo = 17;
    else {
      hi = 16;
      held = 15;
      if (!round_trips(out, size, 15, v))
        lo = 16;
      else
        hi = 15;
    }
    while (lo < hi) {
      int mid = (lo + hi) / 2;
      held = mid;
      if (round_trips(out, size, mid, v))
        hi = mid;
      else
        lo = mid + 1;
    }
    if (held != hi)
      snprintf(out, size, "%.*g", hi, v);
  }
  /* %g writes 90 as "9e+01": a whole number below 1e17 reads better in
   * full, and "%.0f" of it is exact. */
  if (strchr(out, 'e') != NULL && fabs(v) >= 1 && fabs(v) < 1e17)
    snprintf(out, size, "%.0f", v);
}

/* A finite double with prec decimals (prec < 0: shortest round trip). */
static void fmt_number(char *out, size_t size, double v, int prec, int plus) {
  if (prec < 0)
    fmt_shortest(out, size, v);
  else
    snprintf(out, size, "%.*f", prec, v);
  /* "-0.0" reads as a sign without a size: write it unsigned, unless
   * signs were asked for, when it tells a small negative number. */
  if (out[0] == '-' && (!plus || v == 0)) {
    int zero = 1;
    for (const char *q = out + 1; *q; q++)
      if (*q >= '1' && *q <= '9') {
        zero = 0;
        break;
      }
    if (zero)
      memmove(out, out + 1, strlen(out));
  }
  if (plus && v > 0) {
    size_t n = strlen(out);
    if (n + 2 <= size) {
      memmove(out + 1, out, n + 1);
      out[0] = '+';
    }
  }
}

/* The text of a cell in table, TSV and CSV output (not JSON); NULL for a
 * null cell.  tmp holds at least 64 bytes. */
static const char *cell_text(const tf_cell *c, char *tmp, size_t size) {
  switch (c->kind) {
  case TF_CELL_STR:
    return c->s;
  case TF_CELL_INT:
    snprintf(tmp, size, "%lld", c->i);
    return tmp;
  case TF_CELL_DBL:
    if (isnan(c->d))
      return NULL;
    if (isinf(c->d))
      return c->d > 0 ? "inf" : "-inf";
    fmt_number(tmp, size, c->d, c->prec, c->plus);
    return tmp;
  case TF_CELL_DATE:
    if (twofold_date_format(c->day, tmp, size) != 0)
      return NULL;
    return tmp;
  default:
    return NULL;
  }
}

static void json_string(buf *b, const char *s) {
  buf_putc(b, '"');
  for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
    char esc[8];
    switch (*p) {
    case '"':
      buf_puts(b, "\\\"");
      break;
    case '\\':
      buf_puts(b, "\\\\");
      break;
    case '\b':
      buf_puts(b, "\\b");
      break;
    case '\f':
      buf_puts(b, "\\f");
      break;
    case '\n':
      buf_puts(b, "\\n");
      break;
    case '\r':
      buf_puts(b, "\\r");
      break;
    case '\t':
      buf_puts(b, "\\t");
      break;
    default:
      if (*p < 0x20 || *p == 0x7f) {
        snprintf(esc, sizeof esc, "\\u%04x", (unsigned)*p);
        buf_puts(b, esc);
      } else {
        buf_putc(b, (char)*p);
      }
    }
  }
  buf_putc(b, '"');
}

static void json_value(buf *b, const tf_cell *c) {
  char tmp[64];
  switch (c->kind) {
  case TF_CELL_STR:
    json_string(b, c->s);
    return;
  case TF_CELL_INT:
    snprintf(tmp, sizeof tmp, "%lld", c->i);
    buf_puts(b, tmp);
    return;
  case TF_CELL_DBL:
    if (!isfinite(c->d)) {
      buf_puts(b, "null");
      return;
    }
    fmt_number(tmp, sizeof tmp, c->d, -1, 0);
    buf_puts(b, tmp);
    return;
  case TF_CELL_DATE:
    if (twofold_date_format(c->day, tmp, sizeof tmp) == 0) {
      json_string(b, tmp);
      return;
    }
    buf_puts(b, "null");
    return;
  default:
    buf_puts(b, "null");
  }
}

static void tsv_field(buf *b, const char *s) {
  for (const char *p = s; *p; p++) {
    switch (*p) {
    case '\t':
      buf_puts(b, "\\t");
      break;
    case '\n':
      buf_puts(b, "\\n");
      break;
    case '\r':
      buf_puts(b, "\\r");
      break;
    case '\\':
      buf_puts(b, "\\\\");
      break;
    default:
      buf_putc(b, *p);
    }
  }
}

/* RFC 4180: quote a field holding a comma, quote, CR or LF (and one with
 * leading or trailing spaces, which some readers trim); double quotes. */
static void csv_field(buf *b, const char *s) {
  size_t n = strlen(s);
  int quote = strpbrk(s, ",\"\r\n") != NULL ||
              (n > 0 && (s[0] == ' ' || s[n - 1] == ' '));
  if (!quote) {
    buf_add(b, s, n);
    return;
  }
  buf_putc(b, '"');
  for (const char *p = s; *p; p++) {
    if (*p == '"')
      buf_putc(b, '"');
    buf_putc(b, *p);
  }
  buf_putc(b, '"');
}

/* Display width of UTF-8 text: one column per code point (the commands
 * write no wide or combining characters of their own). */
static size_t text_width(const char *s) {
  size_t w = 0;
  for (const unsigned char *p = (const unsigned char *)s; *p; p++)
    if ((*p & 0xC0) != 0x80)
      w++;
  return w;
}

/* ------------------------------------------------------------------ */
/* The writer                                                          */
/* ------------------------------------------------------------------ */

struct tf_writer {
  FILE *out;
  int format;
  const tf_column *cols;
  size_t ncols;
  int header_done;
  int failed; /* errno of the first failure, or 0 */
  /* tables: rows held as strings (NULL = null cell), nrows x ncols */
  char **cells;
  size_t nrows, cap;
};

const char *tf_format_name(int format) {
  switch (format) {
  case TF_FORMAT_TABLE:
    return "table";
  case TF_FORMAT_TSV:
    return "tsv";
  case TF_FORMAT_CSV:
    return "csv";
  case TF_FORMAT_JSON:
    return "json";
  default:
    return NULL;
  }
}

int tf_format_from_name(const char *name) {
  for (int f = TF_FORMAT_TABLE; f <= TF_FORMAT_JSON; f++)
    if (strcmp(name, tf_format_name(f)) == 0)
      return f;
  return -1;
}

tf_writer *tf_writer_new(FILE *out, int format, const tf_column *cols,
                         size_t ncols) {
  tf_writer *w = calloc(1, sizeof *w);
  if (w == NULL)
    return NULL;
  w->out = out;
  w->format = format;
  w->cols = cols;
  w->ncols = ncols;
  return w;
}

void tf_writer_free(tf_writer *w) {
  if (w == NULL)
    return;
  for (size_t i = 0; i < w->nrows * w->ncols; i++)
    free(w->cells[i]);
  free(w->cells);
  free(w);
}

static int put_buf(tf_writer *w, buf *b) {
  if (b->failed) {
    free(b->p);
    w->failed = ENOMEM;
    errno = ENOMEM;
    return -1;
  }
  if (b->n > 0 && fwrite(b->p, 1, b->n, w->out) != b->n) {
    w->failed = errno ? errno : EIO;
    free(b->p);
    errno = w->failed;
    return -1;
  }
  free(b->p);
  return 0;
}

static char *dup_text(const char *s) {
  size_t n = strlen(s) + 1;
  char *p = malloc(n);
  if (p)
    memcpy(p, s, n);
  return p;
}

static int table_hold(tf_writer *w, const tf_cell *cells) {
  if (w->nrows == w->cap) {
    size_t cap = w->cap ? 2 * w->cap : 16;
    if (cap > SIZE_MAX / sizeof(char *) / w->ncols) {
      errno = ENOMEM;
      return -1;
    }
    char **p = realloc(w->cells, cap * w->ncols * sizeof *p);
    if (p == NULL) {
      errno = ENOMEM;
      return -1;
    }
    w->cells = p;
    w->cap = cap;
  }
  char **row = w->cells + w->nrows * w->ncols;
  for (size_t j = 0; j < w->ncols; j++) {
    char tmp[64];
    const char *t = cell_text(&cells[j], tmp, sizeof tmp);
    row[j] = NULL;
    if (t != NULL) {
      /* Control characters would break the alignment: show them as '?'. */
      row[j] = dup_text(t);
      if (row[j] == NULL) {
        for (size_t k = 0; k < j; k++)
          free(row[k]);
        errno = ENOMEM;
        return -1;
      }
      for (char *q = row[j]; *q; q++)
        if ((unsigned char)*q < 0x20 || *q == 0x7f)
          *q = '?';
    }
  }
  w->nrows++;
  return 0;
}

/* The TSV or CSV header line of w's columns, into b. */
static void header_line(const tf_writer *w, buf *b) {
  char sep = w->format == TF_FORMAT_TSV ? '\t' : ',';
  for (size_t j = 0; j < w->ncols; j++) {
    if (j > 0)
      buf_putc(b, sep);
    if (w->format == TF_FORMAT_TSV)
      tsv_field(b, w->cols[j].name);
    else
      csv_field(b, w->cols[j].name);
  }
  buf_putc(b, '\n');
}

int tf_writer_row(tf_writer *w, const tf_cell *cells) {
  if (w->failed) {
    errno = w->failed;
    return -1;
  }
  if (w->format == TF_FORMAT_TABLE) {
    if (table_hold(w, cells) != 0) {
      w->failed = errno;
      return -1;
    }
    return 0;
  }
  buf b = {0};
  char sep = w->format == TF_FORMAT_TSV ? '\t' : ',';
  if (!w->header_done && w->format != TF_FORMAT_JSON)
    header_line(w, &b);
  w->header_done = 1;
  if (w->format == TF_FORMAT_JSON) {
    buf_putc(&b, '{');
    for (size_t j = 0; j < w->ncols; j++) {
      if (j > 0)
        buf_putc(&b, ',');
      json_string(&b, w->cols[j].name);
      buf_putc(&b, ':');
      json_value(&b, &cells[j]);
    }
    buf_puts(&b, "}\n");
  } else {
    for (size_t j = 0; j < w->ncols; j++) {
      char tmp[64];
      const char *t = cell_text(&cells[j], tmp, sizeof tmp);
      if (j > 0)
        buf_putc(&b, sep);
      if (t == NULL)
        continue;
      if (w->format == TF_FORMAT_TSV)
        tsv_field(&b, t);
      else
        csv_field(&b, t);
    }
    buf_putc(&b, '\n');
  }
  return put_buf(w, &b);
}

static int table_write(tf_writer *w) {
  size_t *width = calloc(w->ncols ? w->ncols : 1, sizeof *width);
  if (width == NULL) {
    errno = ENOMEM;
    return -1;
  }
  for (size_t j = 0; j < w->ncols; j++) {
    width[j] = text_width(w->cols[j].name);
    for (size_t i = 0; i < w->nrows; i++) {
      const char *t = w->cells[i * w->ncols + j];
      size_t tw = t ? text_width(t) : 1;
      if (tw > width[j])
        width[j] = tw;
    }
  }
  int rc = 0;
  for (size_t i = 0; i <= w->nrows && rc == 0; i++) {
    buf b = {0};
    for (size_t j = 0; j < w->ncols; j++) {
      const char *t = i == 0 ? w->cols[j].name : w->cells[(i - 1) * w->ncols + j];
      if (t == NULL)
        t = "-";
      size_t pad = width[j] - text_width(t);
      int last = j + 1 == w->ncols;
      if (j > 0)
        buf_puts(&b, "  ");
      if (w->cols[j].align == TF_ALIGN_RIGHT)
        for (size_t k = 0; k < pad; k++)
          buf_putc(&b, ' ');
      buf_puts(&b, t);
      if (w->cols[j].align != TF_ALIGN_RIGHT && !last)
        for (size_t k = 0; k < pad; k++)
          buf_putc(&b, ' ');
    }
    buf_putc(&b, '\n');
    rc = put_buf(w, &b);
  }
  free(width);
  return rc;
}

int tf_writer_finish(tf_writer *w) {
  if (w->failed) {
    errno = w->failed;
    return -1;
  }
  if (w->format == TF_FORMAT_TABLE) {
    if (table_write(w) != 0) {
      w->failed = errno;
      return -1;
    }
  } else if (!w->header_done && w->format != TF_FORMAT_JSON) {
    /* No records: TSV and CSV still get their header line. */
    buf b = {0};
    header_line(w, &b);
    w->header_done = 1;
    if (put_buf(w, &b) != 0)
      return -1;
  }
  if (fflush(w->out) != 0) {
    w->failed = errno ? errno : EIO;
    return -1;
  }
  return 0;
}

/* ------------------------------------------------------------------ */
/* Output files                                                        */
/* ------------------------------------------------------------------ */

struct tf_output {
  FILE *f;
  char *path; /* NULL for standard output */
  char *tmp;
};

/* The temporary file to remove if a signal ends the program before the
 * rename.  A command writes one output at a time. */
static char *volatile pending_tmp = NULL;

static void on_signal(int sig) {
  char *p = pending_tmp;
  if (p != NULL)
    unlink(p);
  signal(sig, SIG_DFL);
  raise(sig);
}

static void catch_signals(int on) {
  static const int sigs[] = {SIGINT, SIGTERM, SIGHUP, SIGPIPE};
  for (size_t i = 0; i < sizeof sigs / sizeof sigs[0]; i++) {
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on ? on_signal : SIG_DFL;
    sigemptyset(&sa.sa_mask);
    sigaction(sigs[i], &sa, NULL);
  }
}

tf_output *tf_output_open(const char *path) {
  tf_output *o = calloc(1, sizeof *o);
  if (o == NULL) {
    tf_cli_msg("out of memory");
    return NULL;
  }
  if (path == NULL || strcmp(path, "-") == 0) {
    o->f = stdout;
    return o;
  }
  if (path[0] == '\0') {
    tf_cli_msg("--output: empty file name");
    free(o);
    return NULL;
  }
  size_t n = strlen(path);
  const char *slash = strrchr(path, '/');
  size_t dirlen = slash ? (size_t)(slash - path) + 1 : 0;
  const char *base = path + dirlen;
  if (base[0] == '\0') {
    tf_cli_msg("%s: names a folder, not a file", path);
    free(o);
    return NULL;
  }
  o->path = malloc(n + 1);
  o->tmp = malloc(n + 16);
  if (o->path == NULL || o->tmp == NULL) {
    tf_cli_msg("out of memory");
    free(o->path);
    free(o->tmp);
    free(o);
    return NULL;
  }
  memcpy(o->path, path, n + 1);
  /* ".NAME.XXXXXX" beside the target, so rename() stays in one file
   * system and is atomic. */
  memcpy(o->tmp, path, dirlen);
  snprintf(o->tmp + dirlen, n + 16 - dirlen, ".%s.XXXXXX", base);

  struct stat st;
  mode_t mode;
  if (stat(path, &st) == 0) {
    if (S_ISDIR(st.st_mode)) {
      tf_cli_msg("%s: is a folder", path);
      goto fail;
    }
    if (!S_ISREG(st.st_mode)) {
      /* A device or pipe (/dev/stdout, a FIFO) cannot be replaced by a
       * rename: write to it directly, as to standard output. */
      free(o->tmp);
      o->tmp = NULL;
      if ((o->f = fopen(path, "w")) == NULL) {
        tf_cli_msg("%s: %s", path, strerror(errno));
        goto fail;
      }
      return o;
    }
    mode = st.st_mode & 07777;
  } else {
    mode_t mask = umask(0);
    umask(mask);
    mode = 0666 & ~mask;
  }
  catch_signals(1);
  int fd = mkstemp(o->tmp);
  if (fd < 0) {
    tf_cli_msg("%s: cannot create a temporary file beside it: %s", path,
               strerror(errno));
    catch_signals(0);
    goto fail;
  }
  pending_tmp = o->tmp;
  if (fchmod(fd, mode) != 0 || (o->f = fdopen(fd, "w")) == NULL) {
    tf_cli_msg("%s: %s", o->tmp, strerror(errno));
    close(fd);
    unlink(o->tmp);
    pending_tmp = NULL;
    catch_signals(0);
    goto fail;
  }
  return o;
fail:
  free(o->path);
  free(o->tmp);
  free(o);
  return NULL;
}

FILE *tf_output_stream(tf_output *o) { return o->f; }

static void tf_cli_msg_if(int cond, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
static void tf_cli_msg_if(int cond, const char *fmt, ...) {
  if (!cond)
    return;
  va_list ap;
  va_start(ap, fmt);
  vmsg(fmt, ap);
  va_end(ap);
}

static void output_free(tf_output *o) {
  free(o->path);
  free(o->tmp);
  free(o);
}

void tf_output_abort(tf_output *o) {
  if (o == NULL)
    return;
  if (o->path != NULL && o->tmp == NULL) {
    fclose(o->f);
  } else if (o->path != NULL) {
    fclose(o->f);
    unlink(o->tmp);
    pending_tmp = NULL;
    catch_signals(0);
  }
  output_free(o);
}

int tf_output_end(tf_output **out, tf_writer *w, int st, const char *path) {
  if (st == TF_EXIT_OK && w != NULL && tf_writer_finish(w) != 0)
    st = -1;
  if (st == -1) {
    tf_cli_msg("cannot write to %s: %s",
               path && strcmp(path, "-") ? path : "standard output",
               strerror(errno));
    return TF_EXIT_OUTPUT;
  }
  if (st == TF_EXIT_OK) {
    st = tf_output_commit(*out);
    *out = NULL;
  }
  return st;
}

/* Make the rename itself durable: sync the folder that holds path.  A
 * failure here cannot undo the rename and is not reported. */
static void sync_folder(const char *path) {
  const char *slash = strrchr(path, '/');
  char *dir = NULL;
  if (slash == NULL) {
    dir = dup_text(".");
  } else {
    size_t n = slash == path ? 1 : (size_t)(slash - path);
    dir = malloc(n + 1);
    if (dir != NULL) {
      memcpy(dir, path, n);
      dir[n] = '\0';
    }
  }
  if (dir == NULL)
    return;
  int fd = open(dir, O_RDONLY);
  if (fd >= 0) {
    (void)fsync(fd);
    close(fd);
  }
  free(dir);
}

int tf_output_commit(tf_output *o) {
  if (o->tmp == NULL) {
    /* Standard output, or a device or pipe written directly. */
    int bad = fflush(o->f) != 0 || ferror(o->f);
    int e = errno;
    if (o->path != NULL && fclose(o->f) != 0 && !bad) {
      bad = 1;
      e = errno;
    }
    tf_cli_msg_if(bad, "cannot write to %s: %s",
                  o->path ? o->path : "standard output", strerror(e ? e : EIO));
    output_free(o);
    return bad ? TF_EXIT_OUTPUT : TF_EXIT_OK;
  }
  const char *what = NULL;
  int e = 0;
  if (fflush(o->f) != 0 || ferror(o->f))
    what = "cannot write";
  else if (fsync(fileno(o->f)) != 0)
    what = "cannot sync";
  e = errno;
  if (fclose(o->f) != 0 && what == NULL) {
    what = "cannot close";
    e = errno;
  }
  if (what == NULL && rename(o->tmp, o->path) != 0) {
    what = "cannot rename the temporary file over";
    e = errno;
  }
  if (what != NULL) {
    unlink(o->tmp);
    pending_tmp = NULL;
    catch_signals(0);
    tf_cli_msg("%s %s: %s (not changed)", what, o->path,
               strerror(e ? e : EIO));
    output_free(o);
    return TF_EXIT_OUTPUT;
  }
  pending_tmp = NULL;
  catch_signals(0);
  sync_folder(o->path);
  output_free(o);
  return TF_EXIT_OK;
}

/* ------------------------------------------------------------------ */
/* Helpers                                                             */
/* ------------------------------------------------------------------ */

const char *tf_cli_format_number(char *out, size_t size, double v, int prec,
                                 int plus) {
  if (isnan(v))
    snprintf(out, size, "-");
  else if (isinf(v))
    snprintf(out, size, "%s", v > 0 ? "inf" : "-inf");
  else
    fmt_number(out, size, v, prec, plus);
  return out;
}

const char *tf_cli_range_text(char *out, size_t size, double lo, double hi,
                              int prec, int plus) {
  if (isnan(lo) || isnan(hi))
    return NULL;
  char a[32], b[32];
  tf_cli_format_number(a, sizeof a, lo, prec, plus);
  tf_cli_format_number(b, sizeof b, hi, prec, plus);
  snprintf(out, size, "%s..%s", a, b);
  return out;
}

void tf_cli_ci_header(char *out, size_t size, double level) {
  char pct[32];
  tf_cli_format_number(pct, sizeof pct, 100 * level, -1, 0);
  snprintf(out, size, "%s%% CI", pct);
}

const char *tf_cli_status_name(int code, char *out, size_t size) {
  if (code == 0) {
    snprintf(out, size, "ok");
    return out;
  }
  const char *name = twofold_err_name(code);
  const char *prefix = "TWOFOLD_E";
  if (strncmp(name, prefix, strlen(prefix)) == 0)
    name += strlen(prefix);
  size_t i = 0;
  for (; name[i] && i + 1 < size; i++)
    out[i] = (char)(name[i] >= 'A' && name[i] <= 'Z' ? name[i] - 'A' + 'a'
                                                     : name[i]);
  out[i] = '\0';
  return out;
}
