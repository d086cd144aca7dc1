/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * chart.c - growth charts as standalone SVG (see chart.h).
 *
 * Presentation only: every estimate is a libtwofold result.  The numbers
 * computed here are geometry (pixel positions, axis ranges, tick choices)
 * and the centred 7-day mean drawn as a display smoothing of the counts.
 *
 * Palette: the colour-blind-safe set of Okabe M, Ito K (2008), "Color
 * Universal Design (CUD): how to make figures and presentations that are
 * friendly to colorblind people" (J*Fly, jfly.uni-koeln.de), used with
 * different lightness, widths and dash patterns per element so the chart
 * also reads in greyscale.
 */
#include "chart.h"
#include "cli.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define TOTAL_NAME_SHOWN "All regions"
#define TF_LN2 0.69314718055994530942

/* Colours (Okabe & Ito 2008) and greys. */
#define C_INK "#1a1a1a"
#define C_GREY "#6b6b6b"
#define C_LIGHT "#d9d9d9"
#define C_GRID "#ececec"
#define C_BLUE "#0072B2"      /* 7-day mean, rolling growth rate       */
#define C_SKY "#56B4E9"       /* rolling growth interval band          */
#define C_VERMILION "#D55E00" /* window trend                          */
#define C_ORANGE "#E69F00"    /* window trend interval wedge           */
#define C_PURPLE "#CC79A7"    /* changes: P(change), change dates      */
#define C_PURPLE_DARK "#8E4A75"

/* Page: A4 portrait, 210 mm wide, drawn in px at 96 px per inch. */
#define PAGE_W 794.0
#define PAGE_MM 210.0
#define MARGIN 24.0
#define GAP_X 18.0
#define GAP_Y 16.0

typedef struct cp_seg {
  size_t start, end;
  double rate, level;
} cp_seg;

typedef struct cp_change {
  size_t day, from, to;
  double prob;
} cp_change;

typedef struct region {
  const twofold_series *s;
  size_t col;
  int ocol;
  int is_total;
  size_t input_order;
  /* days shown: first .. first + n - 1 (end = the as-of day) */
  int32_t first, end;
  size_t n;
  double *y;     /* counts, NaN = missing                           */
  double *yfit;  /* counts the fits see (NaN where no offset value) */
  double *off;   /* log offsets, or NULL                            */
  double *mean7; /* display smoothing                               */
  double *rr, *rlo, *rhi; /* rolling window growth rate            */
  double *pch, *gm;       /* changepoint posterior                 */
  /* the latest window fit, as twofold reports it */
  int est_status;
  double r, lo, hi, t, tlo, thi, a;
  int sense;
  int32_t wstart;
  /* the changepoint posterior */
  int cp_status;
  size_t nseg, nchg;
  cp_seg *seg;
  cp_change *chg;
} region;

struct tf_chart {
  const twofold_fit_options *fo;
  size_t window;
  double level;
  int have_as_of;
  int32_t as_of;
  region *r;
  size_t n, cap;
  int failed; /* an add ran out of memory */
};

tf_chart *tf_chart_new(const twofold_fit_options *fo, size_t window,
                       double level, int have_as_of, int32_t as_of) {
  tf_chart *c = calloc(1, sizeof *c);
  if (c == NULL) {
    tf_cli_msg("out of memory");
    return NULL;
  }
  c->fo = fo;
  c->window = window;
  c->level = level;
  c->have_as_of = have_as_of;
  c->as_of = as_of;
  return c;
}

int tf_chart_add(tf_chart *c, const twofold_series *s, size_t col, int ocol,
                 int is_total) {
  if (c->n == c->cap) {
    size_t cap = c->cap ? 2 * c->cap : 8;
    region *r = realloc(c->r, cap * sizeof *r);
    if (r == NULL) {
      tf_cli_msg("out of memory");
      c->failed = 1;
      return -1;
    }
    c->r = r;
    c->cap = cap;
  }
  region *g = &c->r[c->n];
  memset(g, 0, sizeof *g);
  g->s = s;
  g->col = col;
  g->ocol = ocol;
  g->is_total = is_total;
  g->input_order = c->n++;
  return 0;
}

static void region_free(region *g) {
  free(g->y);
  free(g->yfit);
  free(g->off);
  free(g->mean7);
  free(g->rr);
  free(g->rlo);
  free(g->rhi);
  free(g->pch);
  free(g->gm);
  free(g->seg);
  free(g->chg);
}

void tf_chart_free(tf_chart *c) {
  if (c == NULL)
    return;
  for (size_t i = 0; i < c->n; i++)
    region_free(&c->r[i]);
  free(c->r);
  free(c);
}

/* ------------------------------------------------------------------ */
/* Estimates (library calls)                                           */
/* ------------------------------------------------------------------ */

/* The day the estimates end on, as twofold chooses it: --as-of, else the
 * last day with a count, else the series' last day. */
static int32_t end_day(const tf_chart *c, const region *g) {
  const double *v = twofold_series_values(g->s, g->col);
  size_t len = twofold_series_length(g->s);
  int32_t first = twofold_series_first_day(g->s);
  if (c->have_as_of)
    return c->as_of;
  size_t b = len;
  while (b > 0 && isnan(v[b - 1]))
    b--;
  if (b > 0)
    return first + (int32_t)(b - 1);
  return len > 0 ? first + (int32_t)(len - 1) : first - 1;
}

/* The window fit ending on g->end, built as twofold builds it. */
static int window_estimate(const tf_chart *c, region *g, twofold_fit *fit,
                           double *wy, double *woff) {
  size_t w = c->window;
  int32_t first = twofold_series_first_day(g->s);
  size_t len = twofold_series_length(g->s);
  const double *v = twofold_series_values(g->s, g->col);
  const double *ov =
      g->ocol >= 0 ? twofold_series_values(g->s, (size_t)g->ocol) : NULL;
  g->wstart = g->end - (int32_t)w + 1;
  g->r = g->lo = g->hi = g->a = NAN;
  g->t = g->tlo = g->thi = NAN;
  g->sense = 0;
  for (size_t k = 0; k < w; k++) {
    int64_t idx = (int64_t)g->wstart + (int64_t)k - first;
    double y = NAN, off = 0;
    if (idx >= 0 && (uint64_t)idx < len) {
      y = v[idx];
      if (ov != NULL) {
        double x = ov[idx];
        if (isnan(x) || !(x > 0))
          y = NAN;
        else
          off = log(x);
      }
    }
    wy[k] = y;
    woff[k] = off;
  }
  int rc = twofold_growth_fit(fit, c->fo, wy, ov ? woff : NULL, w,
                              twofold_date_weekday(g->wstart));
  if (rc == TWOFOLD_ENOMEM)
    return rc;
  g->est_status = rc;
  if (rc != 0)
    return 0;
  g->r = twofold_fit_rate(fit);
  g->a = twofold_fit_intercept(fit);
  rc = twofold_fit_interval(fit, TWOFOLD_INTERVAL_DEFAULT, &g->lo, &g->hi);
  if (rc == TWOFOLD_ENOMEM)
    return rc;
  if (rc != 0) {
    g->est_status = rc;
    g->lo = g->hi = NAN;
  }
  if (isfinite(g->lo) && isfinite(g->hi) && isfinite(g->r)) {
    if (twofold_doubling_time(g->r, g->lo, g->hi, &g->t, &g->tlo, &g->thi,
                              &g->sense) != 0)
      g->t = g->tlo = g->thi = NAN;
  }
  return 0;
}

static double *nan_array(size_t n) {
  double *p = malloc((n ? n : 1) * sizeof *p);
  if (p != NULL)
    for (size_t i = 0; i < n; i++)
      p[i] = NAN;
  return p;
}

/* Centred 7-day mean of the days present, shown where the day itself is
 * present and at least 4 of the 7 days are (a display smoothing). */
static void mean7(region *g) {
  for (size_t i = 0; i < g->n; i++) {
    g->mean7[i] = NAN;
    if (isnan(g->y[i]))
      continue;
    double sum = 0;
    int k = 0;
    for (size_t j = i >= 3 ? i - 3 : 0; j <= i + 3 && j < g->n; j++)
      if (!isnan(g->y[j])) {
        sum += g->y[j];
        k++;
      }
    if (k >= 4)
      g->mean7[i] = sum / k;
  }
}

/* Everything for one region; 0 or TWOFOLD_ENOMEM (data problems are kept
 * in the region's statuses and shown). */
static int compute_region(const tf_chart *c, region *g, twofold_fit *fit,
                          twofold_changes *ch, double *wy, double *woff) {
  int32_t first = twofold_series_first_day(g->s);
  size_t len = twofold_series_length(g->s);
  const double *v = twofold_series_values(g->s, g->col);
  const double *ov =
      g->ocol >= 0 ? twofold_series_values(g->s, (size_t)g->ocol) : NULL;
  g->first = first;
  g->end = end_day(c, g);
  g->n = g->end >= first ? (size_t)(g->end - first) + 1 : 0;
  g->cp_status = TWOFOLD_ENODATA;
  int rc = window_estimate(c, g, fit, wy, woff);
  if (rc != 0)
    return rc;
  size_t n = g->n;
  g->y = nan_array(n);
  g->yfit = nan_array(n);
  g->mean7 = nan_array(n);
  g->rr = nan_array(n);
  g->rlo = nan_array(n);
  g->rhi = nan_array(n);
  g->pch = nan_array(n);
  g->gm = nan_array(n);
  if (ov != NULL)
    g->off = calloc(n ? n : 1, sizeof *g->off);
  if (!g->y || !g->yfit || !g->mean7 || !g->rr || !g->rlo || !g->rhi ||
      !g->pch || !g->gm || (ov != NULL && g->off == NULL))
    return TWOFOLD_ENOMEM;
  for (size_t i = 0; i < n && i < len; i++) {
    g->y[i] = g->yfit[i] = v[i];
    if (ov != NULL) {
      if (isnan(ov[i]) || !(ov[i] > 0))
        g->yfit[i] = NAN;
      else
        g->off[i] = log(ov[i]);
    }
  }
  if (n == 0)
    return 0;
  mean7(g);
  int wd = twofold_date_weekday(first);
  rc = twofold_growth_roll(c->fo, g->yfit, g->off, n, wd, c->window,
                           TWOFOLD_ALIGN_TRAILING, g->rr, g->rlo, g->rhi,
                           NULL);
  if (rc == TWOFOLD_ENOMEM)
    return rc;
  if (rc != 0)
    for (size_t i = 0; i < n; i++)
      g->rr[i] = g->rlo[i] = g->rhi[i] = NAN;

  /* The changepoint posterior of the counts, with the library's default
   * prior and segment kind. */
  g->cp_status = twofold_changes_run(ch, NULL, g->y, n, wd);
  if (g->cp_status == TWOFOLD_ENOMEM)
    return TWOFOLD_ENOMEM;
  if (g->cp_status != 0)
    return 0;
  if (twofold_changes_p_change(ch, g->pch) != 0 ||
      twofold_changes_growth(ch, g->gm, NULL, NULL) != 0) {
    g->cp_status = TWOFOLD_EINVAL;
    return 0;
  }
  size_t m = twofold_changes_map_count(ch);
  g->seg = calloc(m + 1, sizeof *g->seg);
  g->chg = calloc(m ? m : 1, sizeof *g->chg);
  if (g->seg == NULL || g->chg == NULL)
    return TWOFOLD_ENOMEM;
  for (size_t k = 0; k <= m; k++) {
    cp_seg *sg = &g->seg[g->nseg];
    if (twofold_changes_map_segment(ch, k, &sg->start, &sg->end, &sg->rate,
                                    NULL, NULL, &sg->level) == 0)
      g->nseg++;
  }
  for (size_t k = 0; k < m; k++) {
    cp_change *cg = &g->chg[g->nchg];
    if (twofold_changes_map_change(ch, k, &cg->day, &cg->from, &cg->to,
                                   &cg->prob) == 0)
      g->nchg++;
  }
  return 0;
}

/* ------------------------------------------------------------------ */
/* Text                                                                */
/* ------------------------------------------------------------------ */

/* XML-escaped text (element content and attribute values). */
static void put_esc(FILE *f, const char *s) {
  for (; *s; s++) {
    switch (*s) {
    case '&': fputs("&amp;", f); break;
    case '<': fputs("&lt;", f); break;
    case '>': fputs("&gt;", f); break;
    case '"': fputs("&quot;", f); break;
    case '\'': fputs("&#39;", f); break;
    default:
      /* control characters are not allowed in XML 1.0 */
      if ((unsigned char)*s < 0x20 && *s != '\t' && *s != '\n')
        fputc('?', f);
      else
        fputc(*s, f);
    }
  }
}

/* Width estimate of UTF-8 text at a font size (sans-serif averages about
 * 0.55 em per character; a layout estimate, not a measurement). */
static double text_width(const char *s, double size) {
  size_t chars = 0;
  for (; *s; s++)
    if (((unsigned char)*s & 0xC0) != 0x80)
      chars++;
  return 0.55 * size * (double)chars;
}

/* A number of days in words: one decimal below 10, whole days above. */
static void days_text(char *out, size_t size, double d) {
  if (!isfinite(d))
    snprintf(out, size, "unbounded");
  else if (d < 9.95)
    snprintf(out, size, "%.1f", d);
  else
    snprintf(out, size, "%.0f", d);
}

/* A percentage with sign, one decimal, U+2212 for minus. */
static void pct_text(char *out, size_t size, double p, int plus) {
  double a = fabs(p);
  if (a < 0.05)
    snprintf(out, size, "0.0%%");
  else
    snprintf(out, size, "%s%.1f%%",
             p < 0 ? "\xe2\x88\x92" : plus ? "+" : "", a);
}

/* The growth sentence of a heading, e.g. "growing 3.1% per day, doubling
 * in about 22 days (interval 15–41 days)".  *comma gets the offset of
 * the ", " where a narrow heading may break the line (0: none). */
static void growth_words(const tf_chart *c, const region *g, char *out,
                         size_t size, size_t *comma) {
  char a[32], b[32], t[32], p[32];
  *comma = 0;
  if (g->n == 0 || g->est_status != 0 || !isfinite(g->r)) {
    if (g->est_status == TWOFOLD_EZERO || g->est_status == TWOFOLD_EFEWEVENTS ||
        g->est_status == TWOFOLD_ENODATA || g->n == 0)
      snprintf(out, size, "too few counts in the last %zu days for an estimate",
               c->window);
    else
      snprintf(out, size, "no estimate (%s)", twofold_strerror(g->est_status));
    return;
  }
  if (g->lo > 0 || g->hi < 0) {
    int up = g->lo > 0;
    pct_text(p, sizeof p, fabs(100 * g->r), 0);
    days_text(t, sizeof t, g->t);
    days_text(a, sizeof a, g->tlo);
    days_text(b, sizeof b, g->thi);
    int k = snprintf(out, size, "%s %s per day,", up ? "growing" : "shrinking",
                     p);
    if (k > 0 && (size_t)k < size)
      *comma = (size_t)k;
    snprintf(out + (k > 0 && (size_t)k < size ? (size_t)k : 0),
             size - (k > 0 && (size_t)k < size ? (size_t)k : 0),
             " %s in about %s days (interval %s\xe2\x80\x93%s days)",
             up ? "doubling" : "halving", t, a, b);
    return;
  }
  pct_text(p, sizeof p, 100 * g->r, 1);
  pct_text(a, sizeof a, 100 * g->lo, 1);
  pct_text(b, sizeof b, 100 * g->hi, 1);
  if (isnan(g->lo) || isnan(g->hi)) {
    snprintf(out, size, "%s per day, no interval", p);
    return;
  }
  int k = snprintf(out, size, "no clear trend: %s per day,", p);
  if (k > 0 && (size_t)k < size)
    *comma = (size_t)k;
  snprintf(out + (k > 0 && (size_t)k < size ? (size_t)k : 0),
           size - (k > 0 && (size_t)k < size ? (size_t)k : 0),
           " interval %s to %s", a, b);
}

static const char *const month_abbr[12] = {"Jan", "Feb", "Mar", "Apr",
                                            "May", "Jun", "Jul", "Aug",
                                            "Sep", "Oct", "Nov", "Dec"};

static void date_text(char *out, size_t size, int32_t day) {
  if (twofold_date_format(day, out, size) != 0)
    snprintf(out, size, "?");
}

/* ------------------------------------------------------------------ */
/* Layout                                                              */
/* ------------------------------------------------------------------ */

typedef struct layout {
  int ncols;
  double fs;         /* base font size                                */
  double cw;         /* cell width                                     */
  double la, ra;     /* left and right axis margins inside a cell      */
  double pw;         /* plot width                                     */
  double ha, hb, hc; /* panel heights: counts, P(change), growth       */
  double zrow;       /* height of the zero-count row under the log axis */
  double hdate;      /* date labels                                    */
  int32_t d0;        /* first day shown                                */
  size_t ndays;
  int kmax;          /* count axis: 1 .. 2^kmax                        */
  double gmax;       /* growth axis: -gmax .. gmax per day             */
  size_t window;
  double level;
} layout;

static double lx(const layout *L, double dayoff) {
  return L->la + dayoff * L->pw / (double)L->ndays;
}
/* x of the centre of day d (a day number). */
static double xday(const layout *L, int32_t d) {
  return lx(L, (double)(d - L->d0) + 0.5);
}
/* x of the left edge of day d. */
static double xedge(const layout *L, int32_t d) {
  return lx(L, (double)(d - L->d0));
}
/* Panel a: y of a positive count on the log 2 axis. */
static double ycount_log2(const layout *L, double l2) {
  double bottom = L->ha - L->zrow;
  if (l2 < -8)
    l2 = -8;
  if (l2 > L->kmax + 8)
    l2 = L->kmax + 8;
  return bottom - l2 / L->kmax * bottom;
}
static double ycount(const layout *L, double y) {
  return ycount_log2(L, log2(y));
}
static double yzero(const layout *L) { return L->ha - 0.45 * L->zrow; }
/* Panel c: y of a growth rate per day. */
static double ygrowth(const layout *L, double r) {
  if (r > 4 * L->gmax)
    r = 4 * L->gmax;
  if (r < -4 * L->gmax)
    r = -4 * L->gmax;
  return L->hc / 2 - r / L->gmax * (L->hc / 2);
}

static double nice_up(double v) {
  static const double steps[] = {0.02, 0.03, 0.04, 0.05, 0.06, 0.08,
                                 0.10, 0.12, 0.15, 0.20, 0.25, 0.30,
                                 0.40, 0.50, 0.75, 1.00};
  for (size_t i = 0; i < sizeof steps / sizeof steps[0]; i++)
    if (v <= steps[i])
      return steps[i];
  return 1.0;
}

static double cell_heading_height(const layout *L) {
  /* name line, two growth lines, one change line */
  return 1.3 * L->fs + 3 * 1.25 * L->fs + 4;
}

static double cell_height(const layout *L) {
  return cell_heading_height(L) + L->ha + 4 + L->hb + 4 + L->hc + L->hdate;
}

/* ------------------------------------------------------------------ */
/* Drawing                                                             */
/* ------------------------------------------------------------------ */

/* A polyline through the finite points of v (a function of the region's
 * day index mapped by fy), broken where v is NaN. */
static void put_broken_path(FILE *f, const layout *L, const region *g,
                            const double *v,
                            double (*fy)(const layout *, double),
                            const char *attrs) {
  int open = 0, any = 0;
  for (size_t i = 0; i < g->n; i++) {
    if (!isfinite(v[i]) || (fy == ycount && !(v[i] > 0))) {
      open = 0;
      continue;
    }
    if (!any) {
      fprintf(f, "<path %s d=\"", attrs);
      any = 1;
    }
    fprintf(f, "%s%.1f %.1f", open ? " L" : " M",
            xday(L, g->first + (int32_t)i), fy(L, v[i]));
    open = 1;
  }
  if (any)
    fputs("\"/>\n", f);
}

/* The interval band of the rolling growth rate, one closed path per run
 * of days where both ends are finite. */
static void put_band(FILE *f, const layout *L, const region *g,
                     const double *lo, const double *hi, const char *attrs) {
  int any = 0;
  size_t i = 0;
  while (i < g->n) {
    if (!isfinite(lo[i]) || !isfinite(hi[i])) {
      i++;
      continue;
    }
    size_t j = i;
    while (j < g->n && isfinite(lo[j]) && isfinite(hi[j]))
      j++;
    if (!any) {
      fprintf(f, "<path %s d=\"", attrs);
      any = 1;
    }
    for (size_t k = i; k < j; k++)
      fprintf(f, "%s%.1f %.1f", k == i ? " M" : " L",
              xday(L, g->first + (int32_t)k), ygrowth(L, hi[k]));
    for (size_t k = j; k-- > i;)
      fprintf(f, " L%.1f %.1f", xday(L, g->first + (int32_t)k),
              ygrowth(L, lo[k]));
    fputs(" Z", f);
    i = j;
  }
  if (any)
    fputs("\"/>\n", f);
}

/* Date ticks: month starts (every 1, 2, 3, 6 or 12 months) when the span
 * holds at least three, else Mondays (every 1, 2 or 4 weeks); a year
 * label on the first tick and where the year changes. */
typedef struct dtick {
  int32_t day;
  char label[16];
  int year; /* 0: none */
} dtick;
#define MAX_DTICKS 512

static size_t date_ticks(const layout *L, dtick *t) {
  int32_t last = L->d0 + (int32_t)L->ndays - 1;
  double px_day = L->pw / (double)L->ndays;
  int y, m, d;
  size_t n = 0;
  if (twofold_date_to_ymd(L->d0, &y, &m, &d) != 0)
    return 0;
  int month_starts = 0;
  {
    int yy = y, mm = m;
    for (;;) {
      int32_t day;
      if (twofold_date_from_ymd(yy, mm, 1, &day) != 0 || day > last)
        break;
      if (day >= L->d0)
        month_starts++;
      if (++mm > 12) {
        mm = 1;
        yy++;
      }
    }
  }
  int last_year = 0;
  if (month_starts >= 3) {
    static const int steps[] = {1, 2, 3, 6, 12, 24, 60, 120, 600};
    double need = text_width("Mmm", 0.8 * L->fs) + 0.9 * L->fs;
    int step = 1200;
    for (size_t i = 0; i < sizeof steps / sizeof steps[0]; i++)
      if (px_day * 30.44 * steps[i] >= need) {
        step = steps[i];
        break;
      }
    for (; n < MAX_DTICKS;) {
      int32_t day;
      if (twofold_date_from_ymd(y, m, 1, &day) != 0 || day > last)
        break;
      long months = (long)y * 12 + (m - 1);
      if (day >= L->d0 && months % step == 0) {
        t[n].day = day;
        snprintf(t[n].label, sizeof t[n].label, "%s",
                 step >= 12 ? "" : month_abbr[m - 1]);
        t[n].year = (n == 0 || y != last_year) ? y : 0;
        last_year = y;
        n++;
      }
      if (++m > 12) {
        m = 1;
        y++;
      }
    }
    return n;
  }
  double need = text_width("30 Mmm", 0.8 * L->fs) + 0.9 * L->fs;
  int weeks = px_day * 7 >= need ? 1 : px_day * 14 >= need ? 2 : 4;
  int32_t day = L->d0;
  while (twofold_date_weekday(day) != 1)
    day++;
  for (int k = 0; day <= last && n < MAX_DTICKS; day += 7, k++) {
    if (k % weeks)
      continue;
    if (twofold_date_to_ymd(day, &y, &m, &d) != 0)
      break;
    t[n].day = day;
    snprintf(t[n].label, sizeof t[n].label, "%d %s", d, month_abbr[m - 1]);
    t[n].year = (n == 0 || y != last_year) ? y : 0;
    last_year = y;
    n++;
  }
  return n;
}

/* Vertical lines at the date ticks in a panel of height h. */
static void put_date_grid(FILE *f, const layout *L, double h,
                          const dtick *t, size_t nt) {
  fprintf(f, "<g class=\"grid\" stroke=\"" C_GRID "\" stroke-width=\"0.6\">");
  for (size_t i = 0; i < nt; i++)
    if (t[i].day > L->d0)
      fprintf(f, "<line x1=\"%.1f\" y1=\"0\" x2=\"%.1f\" y2=\"%.1f\"/>",
              xedge(L, t[i].day), xedge(L, t[i].day), h);
  fputs("</g>\n", f);
}

static void put_date_axis(FILE *f, const layout *L, double y0,
                          const dtick *t, size_t nt) {
  double fs = 0.8 * L->fs;
  fprintf(f,
          "<g class=\"axis axis-date\" transform=\"translate(0 %.1f)\" "
          "font-size=\"%.1f\" fill=\"" C_GREY "\" text-anchor=\"middle\">",
          y0, fs);
  for (size_t i = 0; i < nt; i++) {
    double x = xedge(L, t[i].day);
    fprintf(f,
            "<line x1=\"%.1f\" y1=\"0\" x2=\"%.1f\" y2=\"2.5\" "
            "stroke=\"" C_GREY "\" stroke-width=\"0.6\"/>",
            x, x);
    if (t[i].label[0] != '\0')
      fprintf(f, "<text class=\"tick\" x=\"%.1f\" y=\"%.1f\">%s</text>", x,
              2.5 + fs, t[i].label);
    if (t[i].year != 0)
      fprintf(f, "<text class=\"tick year\" x=\"%.1f\" y=\"%.1f\">%d</text>",
              x, 2.5 + (t[i].label[0] ? 2.1 : 1) * fs, t[i].year);
  }
  fputs("</g>\n", f);
}

/* Panel a: counts, 7-day mean, window trend, segments, change marks. */
static void put_counts_panel(FILE *f, const layout *L, const region *g,
                             double y0, const dtick *dt, size_t ndt) {
  double fs = 0.8 * L->fs;
  double bottom = L->ha - L->zrow;
  fprintf(f, "<g class=\"panel panel-counts\" transform=\"translate(0 %.1f)\">\n",
          y0);
  /* doubling ticks: label every power of 2 when they are 1.05 font sizes
   * apart, else every second one */
  double spacing = bottom / L->kmax;
  int every = spacing >= 1.05 * fs ? 1 : spacing >= 0.55 * fs ? 2 : 4;
  fprintf(f, "<g class=\"grid\" stroke=\"" C_GRID "\" stroke-width=\"0.6\">");
  for (int k = 0; k <= L->kmax; k++)
    fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>",
            L->la, ycount_log2(L, k), L->la + L->pw, ycount_log2(L, k));
  fputs("</g>\n", f);
  put_date_grid(f, L, L->ha, dt, ndt);
  fprintf(f,
          "<g class=\"axis axis-count\" font-size=\"%.1f\" fill=\"" C_GREY
          "\" text-anchor=\"end\">",
          fs);
  for (int k = 0; k <= L->kmax; k += every)
    fprintf(f, "<text class=\"tick\" x=\"%.1f\" y=\"%.1f\">%.0f</text>",
            L->la - 2.5, ycount_log2(L, k) + 0.35 * fs, ldexp(1.0, k));
  fprintf(f, "<text class=\"tick zero\" x=\"%.1f\" y=\"%.1f\">0</text>",
          L->la - 2.5, yzero(L) + 0.35 * fs);
  fputs("</g>\n", f);
  /* a break between the log axis and the zero row */
  fprintf(f,
          "<path class=\"axis-break\" d=\"M%.1f %.1f h%.1f\" stroke=\"" C_LIGHT
          "\" stroke-width=\"0.6\" stroke-dasharray=\"1.5 1.5\"/>\n",
          L->la, bottom + 0.5 * (L->ha - bottom - 0.45 * L->zrow) + 0.5,
          L->pw);
  fprintf(f, "<g clip-path=\"url(#clip-counts)\">\n");
  /* missing days: hatched */
  fprintf(f, "<g class=\"missing\" fill=\"url(#hatch)\">");
  for (size_t i = 0; i < g->n; i++) {
    if (!isnan(g->y[i]))
      continue;
    size_t j = i;
    while (j < g->n && isnan(g->y[j]))
      j++;
    fprintf(f, "<rect x=\"%.1f\" y=\"0\" width=\"%.1f\" height=\"%.1f\"/>",
            xedge(L, g->first + (int32_t)i),
            xedge(L, g->first + (int32_t)j) - xedge(L, g->first + (int32_t)i),
            L->ha);
    i = j;
  }
  fputs("</g>\n", f);
  /* intervals of the change dates, light */
  fprintf(f, "<g class=\"change-intervals\" fill=\"" C_PURPLE
             "\" fill-opacity=\"0.16\">");
  for (size_t k = 0; k < g->nchg; k++) {
    const cp_change *cg = &g->chg[k];
    double x1 = xedge(L, g->first + (int32_t)cg->from);
    double x2 = xedge(L, g->first + (int32_t)cg->to + 1);
    fprintf(f, "<rect x=\"%.1f\" y=\"0\" width=\"%.1f\" height=\"%.1f\"/>",
            x1, x2 - x1, bottom);
  }
  fputs("</g>\n", f);
  /* counts and zeros */
  double rad = L->ncols >= 3 ? 0.9 : 1.05;
  fprintf(f, "<g class=\"counts\" fill=\"" C_GREY "\" fill-opacity=\"0.75\">");
  for (size_t i = 0; i < g->n; i++)
    if (g->y[i] > 0)
      fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.2f\"/>",
              xday(L, g->first + (int32_t)i), ycount(L, g->y[i]), rad);
  fputs("</g>\n", f);
  fprintf(f, "<g class=\"zeros\" fill=\"none\" stroke=\"" C_INK
             "\" stroke-width=\"0.5\">");
  for (size_t i = 0; i < g->n; i++)
    if (g->y[i] == 0)
      fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.2f\"/>",
              xday(L, g->first + (int32_t)i), yzero(L), rad + 0.4);
  fputs("</g>\n", f);
  /* the 7-day mean */
  put_broken_path(f, L, g, g->mean7, ycount,
                  "class=\"mean7\" fill=\"none\" stroke=\"" C_BLUE
                  "\" stroke-width=\"1.3\" stroke-linejoin=\"round\"");
  /* segments of the most probable segmentation */
  if (g->nseg > 0) {
    fprintf(f, "<path class=\"segments\" fill=\"none\" stroke=\"" C_INK
               "\" stroke-width=\"1.1\" stroke-dasharray=\"4 2\" d=\"");
    for (size_t k = 0; k < g->nseg; k++) {
      const cp_seg *sg = &g->seg[k];
      if (!(sg->level > 0) || !isfinite(sg->rate))
        continue;
      size_t mid = (sg->start + sg->end) / 2;
      double l0 = log2(sg->level) +
                  sg->rate * ((double)sg->start - (double)mid) / TF_LN2;
      double l1 = log2(sg->level) +
                  sg->rate * ((double)sg->end - (double)mid) / TF_LN2;
      fprintf(f, " M%.1f %.1f L%.1f %.1f",
              xday(L, g->first + (int32_t)sg->start), ycount_log2(L, l0),
              xday(L, g->first + (int32_t)sg->end), ycount_log2(L, l1));
    }
    fputs("\"/>\n", f);
  }
  /* the latest window's trend, with the interval of its growth rate as a
   * wedge pivoting on the window's middle (no offset: the trend is then a
   * count) */
  if (g->est_status == 0 && isfinite(g->a) && isfinite(g->r) && g->off == NULL) {
    double tm = ((double)L->window - 1) / 2;
    double lm = (g->a + g->r * tm) / TF_LN2;
    double x0 = xday(L, g->wstart), x1 = xday(L, g->end);
    double xm = (x0 + x1) / 2;
    fputs("<g class=\"trend\">", f);
    if (isfinite(g->lo) && isfinite(g->hi)) {
      double d = tm / TF_LN2;
      fprintf(f,
              "<path class=\"trend-band\" fill=\"" C_ORANGE
              "\" fill-opacity=\"0.45\" d=\"M%.1f %.1f L%.1f %.1f L%.1f %.1f Z "
              "M%.1f %.1f L%.1f %.1f L%.1f %.1f Z\"/>",
              x0, ycount_log2(L, lm - g->lo * d), x0,
              ycount_log2(L, lm - g->hi * d), xm, ycount_log2(L, lm), x1,
              ycount_log2(L, lm + g->lo * d), x1,
              ycount_log2(L, lm + g->hi * d), xm, ycount_log2(L, lm));
    }
    fprintf(f,
            "<path class=\"trend-line\" fill=\"none\" stroke=\"" C_VERMILION
            "\" stroke-width=\"2\" stroke-linecap=\"round\" d=\"M%.1f %.1f "
            "L%.1f %.1f\"/>",
            x0, ycount_log2(L, lm - g->r * tm / TF_LN2), x1,
            ycount_log2(L, lm + g->r * tm / TF_LN2));
    fputs("</g>\n", f);
  }
  fputs("</g>\n", f); /* clip */
  /* change dates */
  fprintf(f, "<g class=\"changes\" stroke=\"" C_PURPLE_DARK
             "\" stroke-width=\"0.9\" stroke-dasharray=\"1 1.5\">");
  for (size_t k = 0; k < g->nchg; k++) {
    double x = xedge(L, g->first + (int32_t)g->chg[k].day);
    fprintf(f, "<line x1=\"%.1f\" y1=\"0\" x2=\"%.1f\" y2=\"%.1f\"/>", x, x,
            bottom);
  }
  fputs("</g>\n", f);
  fprintf(f,
          "<rect class=\"frame\" x=\"%.1f\" y=\"0\" width=\"%.1f\" "
          "height=\"%.1f\" fill=\"none\" stroke=\"" C_LIGHT
          "\" stroke-width=\"0.6\"/>\n",
          L->la, L->pw, L->ha);
  fputs("</g>\n", f);
}

/* Panel b: P(change) per day. */
static void put_change_panel(FILE *f, const layout *L, const region *g,
                             double y0) {
  double fs = 0.7 * L->fs;
  fprintf(f, "<g class=\"panel panel-change\" transform=\"translate(0 %.1f)\">\n",
          y0);
  fprintf(f,
          "<rect class=\"frame\" x=\"%.1f\" y=\"0\" width=\"%.1f\" "
          "height=\"%.1f\" fill=\"#ffffff\" stroke=\"" C_LIGHT
          "\" stroke-width=\"0.6\"/>\n",
          L->la, L->pw, L->hb);
  if (g->cp_status == 0) {
    fprintf(f, "<g class=\"p-change\" fill=\"" C_PURPLE_DARK "\">");
    double w = L->pw / (double)L->ndays;
    for (size_t i = 0; i < g->n; i++) {
      double p = g->pch[i];
      if (!(p >= 0.005))
        continue;
      if (p > 1)
        p = 1;
      fprintf(f,
              "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\"/>",
              xedge(L, g->first + (int32_t)i), L->hb * (1 - p),
              w > 0.6 ? w : 0.6, L->hb * p);
    }
    fputs("</g>\n", f);
  } else {
    fprintf(f,
            "<text class=\"note\" x=\"%.1f\" y=\"%.1f\" font-size=\"%.1f\" "
            "fill=\"" C_GREY "\">no changepoint estimate (",
            L->la + 3, L->hb / 2 + 0.35 * fs, fs);
    put_esc(f, twofold_strerror(g->cp_status));
    fputs(")</text>\n", f);
  }
  fprintf(f,
          "<g class=\"axis axis-pchange\" font-size=\"%.1f\" fill=\"" C_GREY
          "\"><text x=\"%.1f\" y=\"%.1f\">P(change)</text></g>\n",
          fs, L->la + L->pw + 2.5, L->hb / 2 + 0.35 * fs);
  fputs("</g>\n", f);
}

/* Panel c: growth rate per day with a doubling/halving time scale. */
static void put_growth_panel(FILE *f, const layout *L, const region *g,
                             double y0, const dtick *dt, size_t ndt) {
  double fs = 0.8 * L->fs;
  fprintf(f, "<g class=\"panel panel-growth\" transform=\"translate(0 %.1f)\">\n",
          y0);
  /* left ticks in % per day */
  static const double pct_steps[] = {0.5, 1, 2, 2.5, 5, 10, 20, 25, 50};
  double gpct = 100 * L->gmax, st = 50;
  for (size_t i = 0; i < sizeof pct_steps / sizeof pct_steps[0]; i++)
    if (gpct / pct_steps[i] <= 2.5 + 1e-9) {
      st = pct_steps[i];
      break;
    }
  fprintf(f, "<g class=\"grid\" stroke=\"" C_GRID "\" stroke-width=\"0.6\">");
  for (double v = st; v <= gpct + 1e-9; v += st)
    fprintf(f,
            "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>"
            "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>",
            L->la, ygrowth(L, v / 100), L->la + L->pw, ygrowth(L, v / 100),
            L->la, ygrowth(L, -v / 100), L->la + L->pw, ygrowth(L, -v / 100));
  fputs("</g>\n", f);
  put_date_grid(f, L, L->hc, dt, ndt);
  fprintf(f,
          "<g class=\"axis axis-growth\" font-size=\"%.1f\" fill=\"" C_GREY
          "\" text-anchor=\"end\">",
          fs);
  int nst = (int)floor(gpct / st + 1e-9);
  for (int k = -nst; k <= nst; k++) {
    double vv = k * st;
    char txt[32];
    if (vv == 0)
      snprintf(txt, sizeof txt, "0");
    else
      snprintf(txt, sizeof txt, "%s%g%%", vv < 0 ? "\xe2\x88\x92" : "+",
               fabs(vv));
    fprintf(f, "<text class=\"tick\" x=\"%.1f\" y=\"%.1f\">%s</text>",
            L->la - 2.5, ygrowth(L, vv / 100) + 0.35 * fs, txt);
  }
  fputs("</g>\n", f);
  /* right: doubling above zero, halving below, at r = ln 2 / T */
  static const double times[] = {1, 2, 3.5, 7, 14, 28, 56, 112};
  fprintf(f,
          "<g class=\"axis axis-doubling\" font-size=\"%.1f\" fill=\"" C_INK
          "\">",
          fs);
  double lastpos = -1e9;
  for (size_t i = 0; i < sizeof times / sizeof times[0]; i++) {
    double r = TF_LN2 / times[i];
    if (r > L->gmax * 1.0001)
      continue;
    double yy = ygrowth(L, r);
    if (fabs(yy - lastpos) < 1.05 * fs || L->hc / 2 - yy < 1.05 * fs)
      continue;
    lastpos = yy;
    char lab[16];
    snprintf(lab, sizeof lab, "%g d", times[i]);
    for (int sgn = 1; sgn >= -1; sgn -= 2) {
      double ys = ygrowth(L, sgn * r);
      fprintf(f,
              "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
              "stroke=\"" C_INK "\" stroke-width=\"0.6\"/>",
              L->la + L->pw, ys, L->la + L->pw + 2.5, ys);
      fprintf(f,
              "<text class=\"tick %s\" x=\"%.1f\" y=\"%.1f\">%s</text>",
              sgn > 0 ? "doubling" : "halving", L->la + L->pw + 3.5,
              ys + 0.35 * fs, lab);
    }
  }
  /* the scale's names, turned along the right edge */
  double xt = L->la + L->pw + L->ra - 0.3 * fs;
  fprintf(f,
          "<text class=\"axis-title\" transform=\"translate(%.1f %.1f) "
          "rotate(-90)\" text-anchor=\"middle\" font-size=\"%.1f\" "
          "fill=\"" C_GREY "\">doubling</text>"
          "<text class=\"axis-title\" transform=\"translate(%.1f %.1f) "
          "rotate(-90)\" text-anchor=\"middle\" font-size=\"%.1f\" "
          "fill=\"" C_GREY "\">halving</text>",
          xt, L->hc / 4, 0.85 * fs, xt, 3 * L->hc / 4, 0.85 * fs);
  fputs("</g>\n", f);
  fprintf(f, "<g clip-path=\"url(#clip-growth)\">\n");
  put_band(f, L, g, g->rlo, g->rhi,
           "class=\"growth-band\" fill=\"" C_SKY "\" fill-opacity=\"0.4\"");
  fprintf(f,
          "<line class=\"zero-line\" x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" "
          "y2=\"%.1f\" stroke=\"" C_GREY "\" stroke-width=\"0.8\"/>\n",
          L->la, ygrowth(L, 0), L->la + L->pw, ygrowth(L, 0));
  put_broken_path(f, L, g, g->rr, ygrowth,
                  "class=\"growth-rate\" fill=\"none\" stroke=\"" C_BLUE
                  "\" stroke-width=\"1.2\" stroke-linejoin=\"round\"");
  if (g->cp_status == 0)
    put_broken_path(f, L, g, g->gm, ygrowth,
                    "class=\"growth-posterior\" fill=\"none\" stroke=\"" C_INK
                    "\" stroke-width=\"1\" stroke-dasharray=\"1.2 1.2\"");
  fputs("</g>\n", f);
  fprintf(f, "<g class=\"changes\" stroke=\"" C_PURPLE_DARK
             "\" stroke-width=\"0.9\" stroke-dasharray=\"1 1.5\">");
  for (size_t k = 0; k < g->nchg; k++) {
    double x = xedge(L, g->first + (int32_t)g->chg[k].day);
    fprintf(f, "<line x1=\"%.1f\" y1=\"0\" x2=\"%.1f\" y2=\"%.1f\"/>", x, x,
            L->hc);
  }
  fputs("</g>\n", f);
  fprintf(f,
          "<rect class=\"frame\" x=\"%.1f\" y=\"0\" width=\"%.1f\" "
          "height=\"%.1f\" fill=\"none\" stroke=\"" C_LIGHT
          "\" stroke-width=\"0.6\"/>\n",
          L->la, L->pw, L->hc);
  fputs("</g>\n", f);
}

static void put_region(FILE *f, const tf_chart *c, const layout *L,
                       const region *g, size_t rank, double x, double y) {
  const char *name = twofold_series_region(g->s);
  char asof[16], pct[40];
  date_text(asof, sizeof asof, g->end);
  if (isfinite(g->r))
    snprintf(pct, sizeof pct, "%.6g", 100 * g->r);
  else
    snprintf(pct, sizeof pct, "NaN");
  fprintf(f,
          "<g class=\"region%s\" id=\"region-%zu\" data-rank=\"%zu\" "
          "data-region=\"",
          g->is_total ? " total" : "", rank, rank);
  put_esc(f, name);
  fprintf(f,
          "\" data-as-of=\"%s\" data-growth-rate=\"%s\" "
          "transform=\"translate(%.1f %.1f)\">\n",
          asof, pct, x, y);
  /* heading */
  double fs = L->fs;
  double hy = 1.15 * fs;
  fprintf(f, "<text class=\"heading-name\" x=\"%.1f\" y=\"%.1f\" "
             "font-size=\"%.1f\" font-weight=\"bold\" fill=\"" C_INK "\">",
          L->la, hy, 1.15 * fs);
  if (g->is_total) {
    fputs(TOTAL_NAME_SHOWN " ", f);
    fputs("<tspan font-weight=\"normal\">", f);
    put_esc(f, name);
    fputs("</tspan>", f);
  } else {
    put_esc(f, name);
  }
  fprintf(f, "<tspan class=\"as-of\" font-weight=\"normal\" fill=\"" C_GREY
             "\" font-size=\"%.1f\" dx=\"%.1f\">\xc2\xb7 as of %s</tspan></text>\n",
          0.9 * fs, 0.5 * fs, asof);
  char words[256];
  size_t comma;
  growth_words(c, g, words, sizeof words, &comma);
  hy += 1.3 * fs;
  const char *trend_class = g->est_status == 0 && g->lo > 0   ? "growing"
                            : g->est_status == 0 && g->hi < 0 ? "shrinking"
                                                              : "unclear";
  if (comma > 0 && text_width(words, fs) > L->cw - L->la) {
    words[comma] = '\0';
    fprintf(f, "<text class=\"heading-growth %s\" x=\"%.1f\" y=\"%.1f\" "
               "font-size=\"%.1f\" fill=\"" C_INK "\">", trend_class, L->la,
            hy, fs);
    put_esc(f, words);
    fprintf(f, " <tspan x=\"%.1f\" dy=\"%.1f\">", L->la, 1.25 * fs);
    put_esc(f, words + comma + 1);
    fputs("</tspan></text>\n", f);
  } else {
    fprintf(f, "<text class=\"heading-growth %s\" x=\"%.1f\" y=\"%.1f\" "
               "font-size=\"%.1f\" fill=\"" C_INK "\">", trend_class, L->la,
            hy, fs);
    put_esc(f, words);
    fputs("</text>\n", f);
    hy -= 1.25 * fs; /* the change line moves up one line */
  }
  hy += 2 * 1.25 * fs;
  fprintf(f, "<text class=\"heading-change\" x=\"%.1f\" y=\"%.1f\" "
             "font-size=\"%.1f\" fill=\"" C_GREY "\">", L->la, hy, 0.9 * fs);
  if (g->cp_status != 0) {
    fputs("no changepoint estimate", f);
  } else if (g->nchg == 0) {
    fputs("no change in growth in the most probable segmentation", f);
  } else {
    const cp_change *cg = &g->chg[g->nchg - 1];
    char d[16], a[16], b[16];
    date_text(d, sizeof d, g->first + (int32_t)cg->day);
    date_text(a, sizeof a, g->first + (int32_t)cg->from);
    date_text(b, sizeof b, g->first + (int32_t)cg->to);
    if (cg->from == cg->to)
      fprintf(f, "latest change in growth: %s", d);
    else
      fprintf(f, "latest change in growth: %s (%s to %s)", d, a, b);
  }
  fputs("</text>\n", f);

  double py = cell_heading_height(L);
  dtick dt[MAX_DTICKS];
  size_t ndt = date_ticks(L, dt);
  put_counts_panel(f, L, g, py, dt, ndt);
  py += L->ha + 4;
  put_change_panel(f, L, g, py);
  py += L->hb + 4;
  put_growth_panel(f, L, g, py, dt, ndt);
  py += L->hc;
  put_date_axis(f, L, py, dt, ndt);
  fputs("</g>\n", f);
}

/* A legend entry's sample mark at (x, y) (y the text's middle). */
static void put_key_mark(FILE *f, int kind, double x, double y) {
  switch (kind) {
  case 0: /* count */
    fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"1.3\" fill=\"" C_GREY
               "\"/><circle cx=\"%.1f\" cy=\"%.1f\" r=\"1.3\" fill=\"" C_GREY
               "\"/>", x + 5, y + 1, x + 11, y - 1.5);
    break;
  case 1: /* zero */
    fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"1.6\" fill=\"none\" "
               "stroke=\"" C_INK "\" stroke-width=\"0.5\"/>", x + 8, y);
    break;
  case 2: /* missing */
    fprintf(f, "<rect x=\"%.1f\" y=\"%.1f\" width=\"16\" height=\"7\" "
               "fill=\"url(#hatch)\" stroke=\"" C_LIGHT "\" stroke-width=\"0.5\"/>",
            x, y - 3.5);
    break;
  case 3: /* 7-day mean */
    fprintf(f, "<path d=\"M%.1f %.1f l5 -2 l5 1 l6 -2\" fill=\"none\" "
               "stroke=\"" C_BLUE "\" stroke-width=\"1.3\"/>", x, y + 1.5);
    break;
  case 4: /* window trend and wedge */
    fprintf(f, "<path d=\"M%.1f %.1f l8 -3 l0 0 l8 -5 l0 7 l-8 -2 Z\" "
               "fill=\"" C_ORANGE "\" fill-opacity=\"0.45\"/>"
               "<path d=\"M%.1f %.1f l16 -5\" stroke=\"" C_VERMILION
               "\" stroke-width=\"2\" stroke-linecap=\"round\"/>",
            x, y + 3, x, y + 2.5);
    break;
  case 5: /* segments */
    fprintf(f, "<path d=\"M%.1f %.1f l16 -4\" fill=\"none\" stroke=\"" C_INK
               "\" stroke-width=\"1.1\" stroke-dasharray=\"4 2\"/>", x, y + 2);
    break;
  case 6: /* change date and interval */
    fprintf(f, "<rect x=\"%.1f\" y=\"%.1f\" width=\"10\" height=\"8\" fill=\""
               C_PURPLE "\" fill-opacity=\"0.16\"/><line x1=\"%.1f\" "
               "y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"" C_PURPLE_DARK
               "\" stroke-width=\"0.9\" stroke-dasharray=\"1 1.5\"/>",
            x + 3, y - 4, x + 8, y - 4, x + 8, y + 4);
    break;
  case 7: /* P(change) */
    fprintf(f, "<path d=\"M%.1f %.1f h2 v-2 h2 v-6 h2 v5 h2 v3 Z\" fill=\""
               C_PURPLE_DARK "\"/>", x + 4, y + 4);
    break;
  case 8: /* rolling growth rate and band */
    fprintf(f, "<path d=\"M%.1f %.1f l16 -3 v6 l-16 3 Z\" fill=\"" C_SKY
               "\" fill-opacity=\"0.4\"/><path d=\"M%.1f %.1f l16 -3\" "
               "stroke=\"" C_BLUE "\" stroke-width=\"1.2\"/>",
            x, y - 1.5, x, y + 1.5);
    break;
  case 9: /* posterior mean growth */
    fprintf(f, "<path d=\"M%.1f %.1f l16 -2\" fill=\"none\" stroke=\"" C_INK
               "\" stroke-width=\"1\" stroke-dasharray=\"1.2 1.2\"/>", x, y + 1);
    break;
  default:
    break;
  }
}

/* The legend, flowed in rows; returns its height. */
static double put_legend(FILE *f, const tf_chart *c, double x0, double y0,
                         double width, double fs, int draw) {
  char trend[160], roll[160], pct[32];
  tf_cli_format_number(pct, sizeof pct, 100 * c->level, -1, 0);
  snprintf(trend, sizeof trend,
           "trend of the last %zu days; wedge: its growth rate's %s%% "
           "interval",
           c->window, pct);
  snprintf(roll, sizeof roll,
           "growth rate of the trailing %zu-day window, %s%% interval",
           c->window, pct);
  const char *const texts[] = {
      "daily count (log scale)", "zero count (on the 0 row)",
      "missing day (no report)", "centred 7-day mean", trend,
      "most probable segments (changepoint posterior)",
      "change date with its interval", "P(change) on each day (0 to 1)", roll,
      "posterior mean growth rate"};
  size_t nt = sizeof texts / sizeof texts[0];
  double x = x0, y = y0 + fs, line = 1.55 * fs;
  if (draw)
    fprintf(f, "<g class=\"legend\" font-size=\"%.1f\" fill=\"" C_INK "\">\n",
            fs);
  for (size_t i = 0; i < nt; i++) {
    double w = 20 + text_width(texts[i], fs) + 12;
    if (x > x0 && x + w > x0 + width) {
      x = x0;
      y += line;
    }
    if (draw) {
      fprintf(f, "<g class=\"key\">");
      put_key_mark(f, (int)i, x, y - 0.35 * fs);
      fprintf(f, "<text x=\"%.1f\" y=\"%.1f\">", x + 20, y);
      put_esc(f, texts[i]);
      fputs("</text></g>\n", f);
    }
    x += w;
  }
  if (draw)
    fputs("</g>\n", f);
  return y - y0 + 0.6 * fs;
}

/* Order: the total first, then by current growth rate, fastest first;
 * regions without an estimate last, in input order. */
static int by_growth(const void *pa, const void *pb) {
  const region *a = *(const region *const *)pa, *b = *(const region *const *)pb;
  if (a->is_total != b->is_total)
    return a->is_total ? -1 : 1;
  int ea = a->est_status == 0 && isfinite(a->r);
  int eb = b->est_status == 0 && isfinite(b->r);
  if (ea != eb)
    return ea ? -1 : 1;
  if (ea && a->r != b->r)
    return a->r > b->r ? -1 : 1;
  return a->input_order < b->input_order ? -1 : 1;
}

static int write_svg(FILE *f, const tf_chart *c, region **ord) {
  layout L;
  memset(&L, 0, sizeof L);
  size_t n = c->n;
  L.ncols = n <= 3 ? 1 : n <= 12 ? 2 : 3;
  L.fs = L.ncols == 1 ? 9.5 : L.ncols == 2 ? 8.5 : 7.5;
  L.cw = (PAGE_W - 2 * MARGIN - (L.ncols - 1) * GAP_X) / L.ncols;
  L.la = 3.4 * L.fs;
  L.ra = 4.4 * L.fs;
  L.pw = L.cw - L.la - L.ra;
  L.ha = L.ncols == 1 ? 190 : L.ncols == 2 ? 140 : 118;
  L.zrow = 1.3 * L.fs;
  L.hb = 2.0 * L.fs;
  L.hc = L.ncols == 1 ? 96 : L.ncols == 2 ? 74 : 62;
  L.hdate = 2.6 * 0.8 * L.fs + 4;
  L.window = c->window;
  L.level = c->level;

  /* shared scales */
  int32_t d0 = 0, d1 = 0;
  int have = 0;
  double ymax = 1, rmax = 0;
  for (size_t i = 0; i < n; i++) {
    const region *g = &c->r[i];
    if (g->n == 0)
      continue;
    if (!have || g->first < d0)
      d0 = g->first;
    if (!have || g->end > d1)
      d1 = g->end;
    have = 1;
    for (size_t k = 0; k < g->n; k++) {
      if (g->y[k] > ymax)
        ymax = g->y[k];
      if (isfinite(g->rr[k]) && fabs(g->rr[k]) > rmax)
        rmax = fabs(g->rr[k]);
      if (isfinite(g->gm[k]) && fabs(g->gm[k]) > rmax)
        rmax = fabs(g->gm[k]);
    }
  }
  if (!have) {
    d0 = d1 = c->have_as_of ? c->as_of : 0;
  }
  L.d0 = d0;
  L.ndays = (size_t)(d1 - d0) + 1;
  L.kmax = (int)ceil(log2(ymax) - 1e-9);
  if (L.kmax < 3)
    L.kmax = 3;
  L.gmax = nice_up(rmax * 1.08);

  size_t rows = (n + (size_t)L.ncols - 1) / (size_t)L.ncols;
  double title_fs = 13, sub_fs = 8.5, key_fs = 7.5;
  double ytitle = MARGIN + title_fs;
  double ysub = ytitle + 1.6 * sub_fs;
  double ylegend = ysub + 0.9 * sub_fs;
  double hleg = put_legend(f, c, MARGIN, ylegend, PAGE_W - 2 * MARGIN, key_fs, 0);
  double ygrid = ylegend + hleg + 14;
  double ch = cell_height(&L);
  double yfoot = ygrid + rows * ch + (rows ? rows - 1 : 0) * GAP_Y + 12;
  double H = yfoot + 3 * 1.3 * 7.5 + MARGIN / 2;

  char asof[16];
  date_text(asof, sizeof asof, d1);
  const char *column =
      n > 0 ? twofold_series_column_name(c->r[0].s, c->r[0].col) : "counts";

  fprintf(f,
          "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
          "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" "
          "width=\"%.0fmm\" height=\"%.1fmm\" viewBox=\"0 0 %.0f %.1f\" "
          "font-family=\"sans-serif\">\n",
          PAGE_MM, H * PAGE_MM / PAGE_W, PAGE_W, H);
  fputs("<title>Growth of daily counts by region</title>\n<desc>", f);
  fprintf(f, "Daily %s", "");
  put_esc(f, column);
  fprintf(f, " per region up to %s on a doubling scale, with trend, "
             "changes in growth and growth rates from libtwofold %s.</desc>\n",
          asof, twofold_version_string());
  fprintf(f,
          "<defs>\n"
          "<pattern id=\"hatch\" width=\"3\" height=\"3\" "
          "patternUnits=\"userSpaceOnUse\"><rect width=\"3\" height=\"3\" "
          "fill=\"#f3f3f3\"/><path d=\"M0 3 L3 0\" stroke=\"#a8a8a8\" "
          "stroke-width=\"0.5\"/></pattern>\n"
          "<clipPath id=\"clip-counts\"><rect x=\"%.1f\" y=\"0\" "
          "width=\"%.1f\" height=\"%.1f\"/></clipPath>\n"
          "<clipPath id=\"clip-growth\"><rect x=\"%.1f\" y=\"0\" "
          "width=\"%.1f\" height=\"%.1f\"/></clipPath>\n"
          "</defs>\n",
          L.la, L.pw, L.ha, L.la, L.pw, L.hc);
  fprintf(f, "<rect width=\"%.0f\" height=\"%.1f\" fill=\"#ffffff\"/>\n",
          PAGE_W, H);
  fprintf(f, "<g class=\"page-heading\">\n<text class=\"title\" x=\"%.1f\" "
             "y=\"%.1f\" font-size=\"%.1f\" font-weight=\"bold\" fill=\"" C_INK
             "\">Growth of daily ",
          MARGIN, ytitle, title_fs);
  put_esc(f, column);
  fprintf(f, " by region, as of %s</text>\n", asof);
  int with_total = 0;
  for (size_t i = 0; i < n; i++)
    with_total |= c->r[i].is_total;
  fprintf(f, "<text class=\"subtitle\" x=\"%.1f\" y=\"%.1f\" font-size=\"%.1f\" "
             "fill=\"" C_GREY "\">%sRegions by current growth rate, fastest "
             "first. Same scales in every panel: a straight line is steady "
             "exponential growth, a bend a change in growth.</text>\n",
          MARGIN, ysub, sub_fs, with_total ? "Sum over regions first. " : "");
  put_legend(f, c, MARGIN, ylegend, PAGE_W - 2 * MARGIN, key_fs, 1);
  fputs("</g>\n", f);

  fputs("<g class=\"regions\">\n", f);
  for (size_t i = 0; i < n; i++) {
    size_t row = i / (size_t)L.ncols, col = i % (size_t)L.ncols;
    put_region(f, c, &L, ord[i], i + 1, MARGIN + col * (L.cw + GAP_X),
               ygrid + row * (ch + GAP_Y));
  }
  fputs("</g>\n", f);
  fprintf(f,
          "<g class=\"footer\" font-size=\"7.5\" fill=\"" C_GREY "\">\n"
          "<text x=\"%.1f\" y=\"%.1f\">Estimates depend on testing and "
          "reporting, and change as late reports arrive; the lines describe "
          "the past and do not forecast it (a projection assumes conditions "
          "stay the same).</text>\n"
          "<text x=\"%.1f\" y=\"%.1f\">Read them with your local "
          "public-health authority, whose assessment takes precedence. "
          "Growth rate r per day; doubling time ln 2 / r; halving time "
          "ln 2 / |r|.</text>\n"
          "<text x=\"%.1f\" y=\"%.1f\">Drawn by twofold %s: window fits and "
          "changepoint posterior (Fearnhead 2006) from libtwofold; palette "
          "after Okabe &amp; Ito (2008).</text>\n</g>\n",
          MARGIN, yfoot, MARGIN, yfoot + 1.3 * 7.5, MARGIN,
          yfoot + 2.6 * 7.5, twofold_version_string());
  fputs("</svg>\n", f);
  return ferror(f) ? -1 : 0;
}

int tf_chart_write(tf_chart *c, const char *path) {
  if (c->failed)
    return TF_EXIT_OUTPUT;
  if (path == NULL || path[0] == '\0') {
    tf_cli_msg("--svg: empty file name");
    return TF_EXIT_OUTPUT;
  }
  /* Day spans above the changepoint limit are too long to draw. */
  twofold_fit *fit = NULL;
  twofold_changes *ch = NULL;
  double *wy = malloc((c->window ? c->window : 1) * sizeof *wy);
  double *woff = malloc((c->window ? c->window : 1) * sizeof *woff);
  region **ord = malloc((c->n ? c->n : 1) * sizeof *ord);
  int rc = (wy && woff && ord) ? 0 : TWOFOLD_ENOMEM;
  if (rc == 0)
    rc = twofold_fit_new(&fit);
  if (rc == 0)
    rc = twofold_changes_new(&ch);
  int32_t lo = 0, hi = 0;
  for (size_t i = 0; i < c->n && rc == 0; i++) {
    region *g = &c->r[i];
    int32_t first = twofold_series_first_day(g->s), end = end_day(c, g);
    if (i == 0 || first < lo)
      lo = first;
    if (i == 0 || end > hi)
      hi = end;
    if ((int64_t)hi - lo >= TWOFOLD_CP_MAX_DAYS) {
      tf_cli_msg("--svg: the chart would span more than %d days",
                 TWOFOLD_CP_MAX_DAYS);
      rc = TWOFOLD_ETOOLARGE;
      break;
    }
  }
  for (size_t i = 0; i < c->n && rc == 0; i++) {
    rc = compute_region(c, &c->r[i], fit, ch, wy, woff);
    ord[i] = &c->r[i];
  }
  twofold_fit_free(fit);
  twofold_changes_free(ch);
  free(wy);
  free(woff);
  if (rc != 0) {
    if (rc != TWOFOLD_ETOOLARGE)
      tf_cli_msg("--svg: %s", twofold_strerror(rc));
    free(ord);
    return TF_EXIT_OUTPUT;
  }
  if (c->n > 1)
    qsort(ord, c->n, sizeof *ord, by_growth);
  tf_output *out = tf_output_open(path);
  if (out == NULL) {
    free(ord);
    return TF_EXIT_OUTPUT;
  }
  if (write_svg(tf_output_stream(out), c, ord) != 0) {
    tf_cli_msg("cannot write to %s", path);
    tf_output_abort(out);
    free(ord);
    return TF_EXIT_OUTPUT;
  }
  free(ord);
  return tf_output_commit(out);
}
