/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * KINK changepoints: the growth rate changes and the log-level eta_t is
 * continuous, so segments are not independent and the recursions of
 * Fearnhead (2006) do not apply directly.  Following the grid idea for
 * dependent segments (Fearnhead & Liu 2011, Statistics and Computing
 * 21:217-229, who carry the value of the parameter shared at a change),
 * the log-level at each change ("knot") is put on a grid: knot j sits at
 * day j-1 (knot 0 before the first day, knot n at the last day), segment
 * [s, e] runs from knot s to knot e+1 with eta_t = x_s + b (t - s + 1),
 * b = (x_{e+1} - x_s) / (e - s + 1).  Given the two knot levels the
 * tempered Poisson likelihood of the segment is exact (closed-form
 * geometric sums per weekday class); the prior b ~ N(mean, sd^2) becomes
 * the density of x_{e+1} given x_s; the first knot has the log-gamma prior
 * of the level (mean digamma(alpha) - log beta, variance trigamma(alpha)).
 * The approximation is the trapezoid rule over each knot's level, on a
 * common lattice of spacing h (so a segment needs one geometric sum per
 * lattice difference, not per pair): each knot covers its pilot level (a
 * centred 7-day mean) +- 8 pilot standard errors (+-4 left errors of 1e-2
 * in the change probabilities on short series).  Forward, backward,
 * count and most-probable (Viterbi) recursions then run over (knot, grid
 * point) states; the error against enumeration with fine quadrature is
 * measured in tests/check_changes.c.
 */
#include "cp.h"

#include <gsl/gsl_sf_psi.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define KINK_R 8.0
#define PRUNE_RUN 14

struct tf_kink {
  size_t nk;     /* knots: n + 1 */
  double h;      /* lattice spacing */
  long *k0;      /* first lattice index of each knot */
  int *G;        /* grid points per knot */
  size_t *goff;  /* offset of knot j in the flat state arrays */
  size_t ns;     /* total states */
  double *lw;    /* log quadrature weight per state */
  double *F, *Q; /* forward and backward, per state */
  double *F0;    /* prior of knot 0 times its weights */
  size_t *stop;  /* last candidate end per start */
  int Gmax;
  /* scratch */
  double *T, *lE0, *bD, *lND, *row, *tmp, *ET, *rmax, *ev, *colv;
  size_t ndmax;
};

void tf_kink_free(struct tf_kink *k) {
  if (!k)
    return;
  free(k->k0);
  free(k->G);
  free(k->goff);
  free(k->lw);
  free(k->F);
  free(k->Q);
  free(k->F0);
  free(k->stop);
  free(k->T);
  free(k->lE0);
  free(k->bD);
  free(k->lND);
  free(k->row);
  free(k->tmp);
  free(k->ET);
  free(k->rmax);
  free(k->ev);
  free(k->colv);
  free(k);
}

static inline double xval(const struct tf_kink *k, size_t j, int g) {
  return k->h * (double)(k->k0[j] + g);
}

/* Log weights T[g][g'] of segment [s, e] between grid points of knots s
 * and e+1 (likelihood, slope prior as a density of the end knot, end-knot
 * quadrature weight). */
static void seg_T(const struct twofold_changes *ch, struct tf_kink *k,
                  size_t s, size_t e) {
  const tf_cpdata *d = &ch->d;
  size_t j1 = e + 1;
  int Ga = k->G[s], Gb = k->G[j1];
  double L = (double)(e - s + 1);
  double Y = tf_sumy(d, s, e);
  double S1 = tf_sumty(d, s, e) - ((double)s - 1) * Y;
  long dmin = k->k0[j1] - k->k0[s] - (Ga - 1);
  int nd = Ga + Gb - 1;
  double phi = d->phi, lL = log(L);
  /* E0(b) = sum over the present days t of [s, e] of w_t e^{b (t-s+1)}.
   * With no missing day, class j (day s+j, j < 7) holds q_j = q or q+1
   * days, so E0 = sum_j w_j z^{j+1} expm1(7 b q_j) / expm1(7 b), z = e^b
   * (METHODS B2-B3 in linear space: both expm1 are relatively accurate,
   * so the ratio is accurate down to b = 0, which is taken exactly).  Four
   * transcendental calls per slope; missing days or |7 b (q+1)| > 700 use
   * the general log-space sums. */
  size_t nm = d->cmiss[e + 1] - d->cmiss[s];
  size_t Lz = e - s + 1, q = Lz / 7, r = Lz % 7;
  double wj[7];
  int nj = Lz < 7 ? (int)Lz : 7;
  for (int j = 0; j < nj; j++)
    wj[j] = d->wcls[tf_cls(d, s + (size_t)j)];
  double lsd = -0.9189385332046727 - log(d->rsd) - lL;
  for (int i = 0; i < nd; i++) {
    double b = k->h * (double)(dmin + i) / L, E0;
    if (nm == 0 && fabs(7 * b * (double)(q + 1)) < 700) {
      double zb = exp(b), zp = zb, A = 0, B = 0;
      for (int j = 0; j < nj; j++) {
        if ((size_t)j < r)
          A += wj[j] * zp;
        else
          B += wj[j] * zp;
        zp *= zb;
      }
      if (b == 0) {
        E0 = A * (double)(q + 1) + B * (double)q;
      } else {
        double den = expm1(7 * b);
        E0 = (r ? A * expm1(7 * b * (double)(q + 1)) : 0) +
             (q ? B * expm1(7 * b * (double)q) : 0);
        E0 /= den;
      }
    } else {
      double le;
      tf_esums(d, s, e, (double)s - 1, b, &le, NULL, NULL);
      E0 = exp(le);
    }
    double z = (b - d->rmean) / d->rsd;
    k->bD[i] = b;
    k->lE0[i] = E0 / phi; /* the expected count at level 1, tempered */
    k->lND[i] = lsd - 0.5 * z * z + b * S1 / phi;
  }
  const double *lwb = k->lw + k->goff[j1];
  for (int g = 0; g < Ga; g++) {
    double x = xval(k, s, g), yx = Y * x / phi, ex = exp(x);
    double *Tr = k->T + (size_t)g * (size_t)Gb;
    const double *E0 = k->lE0 + (Ga - 1 - g), *lN = k->lND + (Ga - 1 - g);
    for (int g2 = 0; g2 < Gb; g2++)
      Tr[g2] = yx - ex * E0[g2] + lN[g2] + lwb[g2];
  }
}

static inline double seg_b(const struct tf_kink *k, size_t s, size_t e,
                           int g, int g2) {
  return k->h * (double)(k->k0[e + 1] + g2 - k->k0[s] - g) /
         (double)(e - s + 1);
}

static int setup(struct twofold_changes *ch, struct tf_kink *k) {
  const tf_cpdata *d = &ch->d;
  size_t n = ch->n, nk = n + 1;
  k->nk = nk;
  double *m = malloc(nk * sizeof(double)), *sd = malloc(nk * sizeof(double));
  k->k0 = malloc(nk * sizeof(long));
  k->G = malloc(nk * sizeof(int));
  k->goff = malloc((nk + 1) * sizeof(size_t));
  k->stop = malloc(n * sizeof(size_t));
  if (!m || !sd || !k->k0 || !k->G || !k->goff || !k->stop) {
    free(m);
    free(sd);
    return TWOFOLD_ENOMEM;
  }
  /* pilot levels: centred 7-day windows, widened until 3 days have data */
  for (size_t j = 0; j < nk; j++) {
    size_t t = j == 0 ? 0 : j - 1;
    size_t w = 3;
    double Y = 0, W = 0;
    for (;;) {
      size_t a = t > w ? t - w : 0, b = t + w < n ? t + w : n - 1;
      Y = d->cy[b + 1] - d->cy[a];
      W = d->cw[b + 1] - d->cw[a];
      size_t have = (b - a + 1) - (d->cmiss[b + 1] - d->cmiss[a]);
      if (have >= 3 || (a == 0 && b == n - 1))
        break;
      w *= 2;
    }
    m[j] = log((Y + 0.5) / (W > 0 ? W : 1));
    sd[j] = sqrt(d->phi / (Y + 1) + 0.02 * 0.02);
  }
  double *tmp = malloc(nk * sizeof(double));
  if (!tmp) {
    free(m);
    free(sd);
    return TWOFOLD_ENOMEM;
  }
  memcpy(tmp, sd, nk * sizeof(double));
  /* spacing from the 25% quantile of the pilot errors */
  size_t qi = nk / 4;
  for (size_t i = 0; i <= qi; i++) /* partial selection sort */
    for (size_t j = i + 1; j < nk; j++)
      if (tmp[j] < tmp[i]) {
        double v = tmp[i];
        tmp[i] = tmp[j];
        tmp[j] = v;
      }
  int G = ch->opt.grid;
  k->h = 2 * KINK_R * tmp[qi] / (G - 1);
  free(tmp);
  int Gmin = G / 2 < 4 ? 4 : G / 2, Gmax = G + G / 2;
  k->Gmax = Gmax;
  size_t tot = 0;
  for (size_t j = 0; j < nk; j++) {
    double lo = m[j] - KINK_R * sd[j], hi = m[j] + KINK_R * sd[j];
    long a = (long)floor(lo / k->h), b = (long)ceil(hi / k->h);
    long cnt = b - a + 1;
    if (cnt > Gmax) {
      long c = (long)floor(m[j] / k->h + 0.5);
      a = c - Gmax / 2;
      cnt = Gmax;
    } else if (cnt < Gmin) {
      long c = (long)floor(m[j] / k->h + 0.5);
      a = c - Gmin / 2;
      cnt = Gmin;
    }
    k->k0[j] = a;
    k->G[j] = (int)cnt;
    k->goff[j] = tot;
    tot += (size_t)cnt;
  }
  k->goff[nk] = tot;
  k->ns = tot;
  free(m);
  free(sd);
  k->lw = malloc(tot * sizeof(double));
  k->F = malloc(tot * sizeof(double));
  k->Q = malloc(tot * sizeof(double));
  k->F0 = malloc(tot * sizeof(double));
  k->ndmax = (size_t)(2 * Gmax);
  k->T = malloc((size_t)Gmax * (size_t)Gmax * sizeof(double));
  k->lE0 = malloc(k->ndmax * sizeof(double));
  k->bD = malloc(k->ndmax * sizeof(double));
  k->lND = malloc(k->ndmax * sizeof(double));
  k->row = malloc((size_t)Gmax * sizeof(double));
  k->tmp = malloc((size_t)Gmax * sizeof(double));
  k->ET = malloc((size_t)Gmax * (size_t)Gmax * sizeof(double));
  k->rmax = malloc((size_t)Gmax * sizeof(double));
  k->ev = malloc((size_t)Gmax * sizeof(double));
  k->colv = malloc((size_t)Gmax * sizeof(double));
  if (!k->colv || !k->ET || !k->rmax || !k->ev || !k->lw || !k->F || !k->Q || !k->F0 || !k->T || !k->lE0 || !k->bD ||
      !k->lND || !k->row || !k->tmp)
    return TWOFOLD_ENOMEM;
  double lh = log(k->h), lh2 = log(k->h / 2);
  for (size_t j = 0; j < nk; j++)
    for (int g = 0; g < k->G[j]; g++)
      k->lw[k->goff[j] + (size_t)g] =
          (g == 0 || g == k->G[j] - 1) ? lh2 : lh;
  /* prior of the first knot: log lambda, lambda ~ Gamma(alpha, beta) */
  double mu0 = gsl_sf_psi(d->alpha) - log(d->beta);
  double sd0 = sqrt(gsl_sf_psi_1(d->alpha));
  for (int g = 0; g < k->G[0]; g++) {
    double z = (xval(k, 0, g) - mu0) / sd0;
    k->F0[g] = -0.9189385332046727 - log(sd0) - 0.5 * z * z + k->lw[g];
  }
  return 0;
}

/* ET[g][g'] = exp(T[g][g'] - rmax[g]), rmax the row maxima: one
 * exponential per pair, shared by every use of the segment.  Entries more
 * than ~745 below their row maximum underflow to 0 (negligible). */
static void seg_exp(struct tf_kink *k, int Ga, int Gb) {
  for (int g = 0; g < Ga; g++) {
    const double *Tr = k->T + (size_t)g * (size_t)Gb;
    double *Er = k->ET + (size_t)g * (size_t)Gb, mx = -INFINITY;
    for (int g2 = 0; g2 < Gb; g2++)
      mx = Tr[g2] > mx ? Tr[g2] : mx;
    k->rmax[g] = mx;
    for (int g2 = 0; g2 < Gb; g2++) {
      double v = Tr[g2] - mx;
      Er[g2] = v > -60 ? exp(v) : 0; /* below e^-60 of the row: 0 */
    }
  }
}

/* log sum_g' exp(T[g][g'] + v[g']) for each g into out (ET ready). */
static void rows_lse_e(struct tf_kink *k, int Ga, int Gb, const double *v,
                       double *out) {
  double vm = -INFINITY;
  for (int g2 = 0; g2 < Gb; g2++)
    vm = v[g2] > vm ? v[g2] : vm;
  for (int g2 = 0; g2 < Gb; g2++)
    k->ev[g2] = exp(v[g2] - vm);
  for (int g = 0; g < Ga; g++) {
    const double *Er = k->ET + (size_t)g * (size_t)Gb;
    double sum = 0;
    for (int g2 = 0; g2 < Gb; g2++)
      sum += Er[g2] * k->ev[g2];
    out[g] = sum > 0 ? k->rmax[g] + vm + log(sum) : -INFINITY;
  }
}

/* Forward states are accumulated in linear space with one log scale per
 * knot: the value of state g' is *S + log dst[g'].  Add
 * sum_g exp(u[g] + T[g][g'] + c) (ET ready): one exponential per row and
 * at most two per call, instead of a log-sum-exp per entry. */
static void cols_add_lin(struct tf_kink *k, int Ga, int Gb, const double *u,
                         double c, double *dst, double *S) {
  double M = -INFINITY;
  for (int g = 0; g < Ga; g++)
    M = u[g] + k->rmax[g] > M ? u[g] + k->rmax[g] : M;
  if (M == -INFINITY)
    return;
  double *sum = k->colv;
  for (int g2 = 0; g2 < Gb; g2++)
    sum[g2] = 0;
  for (int g = 0; g < Ga; g++) {
    double v = u[g] + k->rmax[g] - M;
    if (v < -60)
      continue; /* below e^-60 of the largest row: negligible */
    double ev = exp(v);
    const double *Er = k->ET + (size_t)g * (size_t)Gb;
    for (int g2 = 0; g2 < Gb; g2++)
      sum[g2] += ev * Er[g2];
  }
  double off = M + c;
  if (off > *S) {
    double sc = *S == -INFINITY ? 0 : exp(*S - off);
    for (int g2 = 0; g2 < Gb; g2++)
      dst[g2] = dst[g2] * sc + sum[g2];
    *S = off;
  } else {
    double f = exp(off - *S);
    for (int g2 = 0; g2 < Gb; g2++)
      dst[g2] += f * sum[g2];
  }
}

/* Linear states of one knot back to logs, in place. */
static void lin_to_log(double *v, int G, double S) {
  for (int g = 0; g < G; g++)
    v[g] = S > -INFINITY && v[g] > 0 ? S + log(v[g]) : -INFINITY;
}

static double lse_vec(const double *v, int m) {
  double mx = -INFINITY;
  for (int i = 0; i < m; i++)
    if (v[i] > mx)
      mx = v[i];
  if (mx == -INFINITY)
    return mx;
  double s = 0;
  for (int i = 0; i < m; i++)
    s += exp(v[i] - mx);
  return mx + log(s);
}



int tf_kink_run(struct twofold_changes *ch) {
  struct tf_kink *k = calloc(1, sizeof *k);
  if (!k)
    return TWOFOLD_ENOMEM;
  ch->kink = k;
  int rc = setup(ch, k);
  if (rc)
    return rc;
  size_t n = ch->n;
  const tf_lenprior *lp = &ch->lp;
  double leps = ch->opt.prune > 0 ? log(ch->opt.prune) : -INFINITY;
  double *zero = calloc((size_t)k->Gmax, sizeof(double));
  if (!zero)
    return TWOFOLD_ENOMEM;

  /* backward: Q of knot s (segment starts on day s) */
  for (int g = 0; g < k->G[n]; g++)
    k->Q[k->goff[n] + (size_t)g] = 0;
  for (size_t s = n; s-- > 0;) {
    int Ga = k->G[s];
    double *Qs = k->Q + k->goff[s];
    for (int g = 0; g < Ga; g++)
      Qs[g] = -INFINITY;
    double acc = -INFINITY;
    size_t run = 0, e;
    for (e = s; e < n; e++) {
      size_t L = e - s + 1;
      double pr = e + 1 < n ? tf_lg(lp, s, L) : tf_lsurv(lp, s, L);
      if (pr == -INFINITY)
        continue;
      seg_T(ch, k, s, e);
      int Gb = k->G[e + 1];
      seg_exp(k, Ga, Gb);
      const double *nxt = e + 1 < n ? k->Q + k->goff[e + 1] : zero;
      rows_lse_e(k, Ga, Gb, nxt, k->row);
      for (int g = 0; g < Ga; g++)
        Qs[g] = tf_lse(Qs[g], k->row[g] + pr);
      double term = lse_vec(k->row, Ga);
      acc = tf_lse(acc, term + pr);
      if (e + 1 < n && L >= (size_t)ch->opt.min_seg) {
        double bound = term + tf_lsurv(lp, s, L);
        if (bound < leps + acc) {
          if (++run >= PRUNE_RUN)
            break;
        } else {
          run = 0;
        }
      }
    }
    k->stop[s] = e < n ? e : n - 1;
  }
  double *tmp = k->tmp;
  for (int g = 0; g < k->G[0]; g++)
    tmp[g] = k->F0[g] + k->Q[g];
  double lZ = lse_vec(tmp, k->G[0]);
  ch->logZ = lZ;
  /* forward with counts, Viterbi and the growth posterior in one pass */
  int K = ch->opt.max_changes;
  size_t ns = k->ns;
  double *Fj = malloc((size_t)(K + 1) * ns * sizeof(double));
  double *V = malloc(ns * sizeof(double));
  size_t *bps = malloc(ns * sizeof(size_t));
  int *bpg = malloc(ns * sizeof(int));
  double *d0 = calloc(n + 1, sizeof(double)), *d1 = calloc(n + 1, sizeof(double)),
         *d2 = calloc(n + 1, sizeof(double));
  /* F and Fj hold linear values with log scales FS, FjS per knot until
   * their knot is reached, then logs */
  double *FS = malloc((n + 1) * sizeof(double));
  double *FjS = malloc((size_t)(K + 1) * (n + 1) * sizeof(double));
  if (!Fj || !V || !bps || !bpg || !d0 || !d1 || !d2 || !FS || !FjS) {
    free(FS);
    free(FjS);
    free(Fj);
    free(V);
    free(bps);
    free(bpg);
    free(d0);
    free(d1);
    free(d2);
    free(zero);
    return TWOFOLD_ENOMEM;
  }
  for (size_t i = 0; i < ns; i++) {
    k->F[i] = 0;
    V[i] = -INFINITY;
    bps[i] = 0;
    bpg[i] = 0;
  }
  for (size_t i = 0; i < (size_t)(K + 1) * ns; i++)
    Fj[i] = 0;
  for (size_t i = 0; i <= n; i++)
    FS[i] = -INFINITY;
  for (size_t i = 0; i < (size_t)(K + 1) * (n + 1); i++)
    FjS[i] = -INFINITY;
  FS[0] = FjS[0] = 0;
  for (int g = 0; g < k->G[0]; g++) {
    k->F[g] = exp(k->F0[g]);
    Fj[g] = exp(k->F0[g]);
    V[g] = k->F0[g];
  }
  for (int m = 0; m <= K; m++)
    ch->kprob[m] = 0;
  double best = -INFINITY;
  size_t bests = 0;
  int bestg = 0;
  for (size_t s = 0; s < n; s++) {
    int Ga = k->G[s];
    lin_to_log(k->F + k->goff[s], Ga, FS[s]);
    for (int j = 0; j <= K; j++)
      lin_to_log(Fj + (size_t)j * ns + k->goff[s], Ga,
                 FjS[(size_t)j * (n + 1) + s]);
    const double *Fs = k->F + k->goff[s];
    double fmax = -INFINITY;
    for (int g = 0; g < Ga; g++)
      fmax = fmax > Fs[g] ? fmax : Fs[g];
    if (fmax == -INFINITY)
      continue;
    for (size_t e = s; e <= k->stop[s]; e++) {
      size_t L = e - s + 1;
      int last = e + 1 == n;
      double pr = last ? tf_lsurv(lp, s, L) : tf_lg(lp, s, L);
      if (pr == -INFINITY)
        continue;
      seg_T(ch, k, s, e);
      int Gb = k->G[e + 1];
      size_t ob = k->goff[e + 1];
      const double *nxt = last ? zero : k->Q + ob;
      seg_exp(k, Ga, Gb);
      /* growth: pair weights exp(F + T + prior + Q - Z) */
      double w0 = 0, w1 = 0, w2 = 0;
      {
        double M = -INFINITY, vm = -INFINITY;
        for (int g = 0; g < Ga; g++)
          M = Fs[g] + k->rmax[g] > M ? Fs[g] + k->rmax[g] : M;
        for (int g2 = 0; g2 < Gb; g2++)
          vm = nxt[g2] > vm ? nxt[g2] : vm;
        double c = M + vm + pr - lZ;
        if (c > -700 && M > -INFINITY) {
          for (int g2 = 0; g2 < Gb; g2++)
            k->row[g2] = exp(nxt[g2] - vm);
          for (int g = 0; g < Ga; g++) {
            double fu = exp(Fs[g] + k->rmax[g] - M);
            if (fu == 0)
              continue;
            const double *Er = k->ET + (size_t)g * (size_t)Gb;
            const double *bD = k->bD + (Ga - 1 - g);
            for (int g2 = 0; g2 < Gb; g2++) {
              double w = fu * Er[g2] * k->row[g2];
              double b = bD[g2];
              w0 += w;
              w1 += w * b;
              w2 += w * b * b;
            }
          }
          double sc = exp(c);
          w0 *= sc;
          w1 *= sc;
          w2 *= sc;
        }
      }
      d0[s] += w0;
      d0[e + 1] -= w0;
      d1[s] += w1;
      d1[e + 1] -= w1;
      d2[s] += w2;
      d2[e + 1] -= w2;
      /* Viterbi */
      for (int g = 0; g < Ga; g++) {
        double vs = V[k->goff[s] + (size_t)g];
        if (vs == -INFINITY)
          continue;
        const double *Tr = k->T + (size_t)g * (size_t)Gb;
        for (int g2 = 0; g2 < Gb; g2++) {
          double v = vs + Tr[g2] + pr;
          if (last) {
            if (v > best) {
              best = v;
              bests = s;
              bestg = g;
            }
          } else if (v > V[ob + (size_t)g2]) {
            V[ob + (size_t)g2] = v;
            bps[ob + (size_t)g2] = s;
            bpg[ob + (size_t)g2] = g;
          }
        }
      }
      /* counts */
      for (int j = 0; j <= K; j++) {
        const double *u = Fj + (size_t)j * ns + k->goff[s];
        double um = -INFINITY;
        for (int g = 0; g < Ga; g++)
          um = um > u[g] ? um : u[g];
        if (um < fmax - 40)
          continue;
        if (last) {
          rows_lse_e(k, Ga, Gb, zero, k->tmp);
          for (int g = 0; g < Ga; g++)
            ch->kprob[j] += exp(u[g] + k->tmp[g] + pr - lZ);
        } else if (j < K) {
          cols_add_lin(k, Ga, Gb, u, pr, Fj + (size_t)(j + 1) * ns + ob,
                       FjS + (size_t)(j + 1) * (n + 1) + e + 1);
        }
      }
      if (!last)
        cols_add_lin(k, Ga, Gb, Fs, pr, k->F + ob, FS + e + 1);
    }
  }
  free(zero);
  free(FS);
  free(FjS);
  /* change probabilities */
  ch->pch[0] = 0;
  double km = 0;
  for (size_t i = 1; i < n; i++) {
    int Gi = k->G[i];
    for (int g = 0; g < Gi; g++)
      tmp[g] = k->F[k->goff[i] + (size_t)g] + k->Q[k->goff[i] + (size_t)g];
    double v = exp(lse_vec(tmp, Gi) - lZ);
    ch->pch[i] = v > 1 ? 1 : v;
    km += ch->pch[i];
  }
  ch->kmean = km;
  double tot = 0;
  for (int m = 0; m <= K; m++)
    tot += ch->kprob[m];
  ch->ktail = tot < 1 ? 1 - tot : 0;
  double a0 = 0, a1 = 0, a2 = 0;
  for (size_t t = 0; t < n; t++) {
    a0 += d0[t];
    a1 += d1[t];
    a2 += d2[t];
    double mm = a0 > 0 ? a1 / a0 : 0, var = a0 > 0 ? a2 / a0 - mm * mm : 0;
    ch->gmean[t] = mm;
    ch->gsd[t] = var > 0 ? sqrt(var) : 0;
  }
  free(d0);
  free(d1);
  free(d2);
  free(Fj);
  /* MAP path */
  size_t cnt = 0;
  {
    size_t s = bests;
    int g = bestg;
    while (s > 0) {
      size_t o = k->goff[s] + (size_t)g;
      cnt++;
      g = bpg[o];
      s = bps[o];
    }
  }
  ch->nmap = cnt;
  ch->mapstart = malloc((cnt + 2) * sizeof(size_t));
  ch->mapb = malloc((cnt + 1) * sizeof(double));
  ch->mapbsd = malloc((cnt + 1) * sizeof(double));
  ch->maplvl = malloc((cnt + 1) * sizeof(double));
  int *mg = malloc((cnt + 2) * sizeof(int));
  if (!ch->mapstart || !ch->mapb || !ch->mapbsd || !ch->maplvl || !mg) {
    free(mg);
    free(V);
    free(bps);
    free(bpg);
    return TWOFOLD_ENOMEM;
  }
  {
    size_t s = bests, idx = cnt;
    int g = bestg;
    /* the last knot's grid point: the best end for the final segment */
    while (s > 0) {
      size_t o = k->goff[s] + (size_t)g;
      ch->mapstart[idx] = s;
      mg[idx] = g;
      idx--;
      g = bpg[o];
      s = bps[o];
    }
    ch->mapstart[0] = 0;
    mg[0] = g;
    ch->mapstart[cnt + 1] = n;
  }
  free(V);
  free(bps);
  free(bpg);
  for (size_t j = 0; j <= cnt; j++) {
    size_t s = ch->mapstart[j], e = ch->mapstart[j + 1] - 1;
    size_t mid = (s + e) / 2;
    ch->mapb[j] = ch->gmean[mid];
    ch->mapbsd[j] = ch->gsd[mid];
    /* level at the middle day from the posterior-mean growth and the
     * knot's grid level on the most probable path */
    double x = xval(k, s, mg[j]);
    ch->maplvl[j] = exp(x + ch->gmean[mid] * ((double)mid - (double)s + 1));
  }
  free(mg);
  return 0;
}

int tf_kink_sample(const struct twofold_changes *ch, uint64_t seed,
                   size_t draws, unsigned char *change, double *rate,
                   size_t *count) {
  struct tf_kink *k = ch->kink;
  size_t n = ch->n;
  const tf_lenprior *lp = &ch->lp;
  tf_rng r;
  tf_rng_seed(&r, seed);
  double *zero = calloc((size_t)k->Gmax, sizeof(double));
  if (!zero)
    return TWOFOLD_ENOMEM;
  /* seg_T writes into the object's scratch space, which the const API
   * promises not to change visibly: copy the scratch pointers. */
  struct tf_kink kk = *k;
  kk.T = malloc((size_t)k->Gmax * (size_t)k->Gmax * sizeof(double));
  kk.lE0 = malloc(k->ndmax * sizeof(double));
  kk.bD = malloc(k->ndmax * sizeof(double));
  kk.lND = malloc(k->ndmax * sizeof(double));
  if (!kk.T || !kk.lE0 || !kk.bD || !kk.lND) {
    free(kk.T);
    free(kk.lE0);
    free(kk.bD);
    free(kk.lND);
    free(zero);
    return TWOFOLD_ENOMEM;
  }
  double lZ = ch->logZ;
  for (size_t dr = 0; dr < draws; dr++) {
    if (change)
      memset(change + dr * n, 0, n);
    /* first knot */
    double u = tf_rng_unif(&r), acc = 0;
    int g = 0;
    for (g = 0; g < k->G[0]; g++) {
      acc += exp(k->F0[g] + k->Q[g] - lZ);
      if (acc >= u)
        break;
    }
    if (g == k->G[0])
      g--;
    size_t s = 0, cnt = 0;
    while (s < n) {
      double qs = k->Q[k->goff[s] + (size_t)g];
      u = tf_rng_unif(&r);
      acc = 0;
      size_t e, le = s;
      int g2 = 0, lg2 = 0, done = 0;
      for (e = s; e <= k->stop[s] && !done; e++) {
        size_t L = e - s + 1;
        int last = e + 1 == n;
        double pr = last ? tf_lsurv(lp, s, L) : tf_lg(lp, s, L);
        if (pr == -INFINITY)
          continue;
        seg_T(ch, &kk, s, e);
        int Gb = k->G[e + 1];
        const double *nxt = last ? zero : k->Q + k->goff[e + 1];
        const double *Tr = kk.T + (size_t)g * (size_t)Gb;
        for (g2 = 0; g2 < Gb; g2++) {
          acc += exp(Tr[g2] + pr + nxt[g2] - qs);
          le = e;
          lg2 = g2;
          if (acc >= u) {
            done = 1;
            break;
          }
        }
      }
      e = le;
      g2 = lg2;
      double b = seg_b(k, s, e, g, g2);
      cnt += tf_sample_put(n, dr, s, e, b, rate, change);
      s = e + 1;
      g = g2;
    }
    if (count)
      count[dr] = cnt;
  }
  free(kk.T);
  free(kk.lE0);
  free(kk.bD);
  free(kk.lND);
  free(zero);
  return 0;
}
