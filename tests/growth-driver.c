/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * growth-driver: read windows from standard input and print their fits,
 * for the reference comparison tests/ref-growth-statsmodels.py.
 *
 * Input, whitespace-separated, one block per window:
 *   NAME MODEL WEEKDAY FIRST_WEEKDAY N HAS_OFFSET
 *   y_0 .. y_{N-1}          ("nan" marks a missing day)
 *   [o_0 .. o_{N-1}]        (when HAS_OFFSET is 1)
 * MODEL is poisson, quasipoisson or negbin; WEEKDAY 0 or 1.
 * Output: one tab-separated line per window (header first) with the
 * status name and every estimate at 17 significant digits.
 */
#include "twofold.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(void) {
  char name[256], model[64];
  int weekday, fwd, hasoff;
  size_t n;
  twofold_fit *fit;
  twofold_fit_options *o;
  if (twofold_fit_new(&fit) || twofold_fit_options_new(&o))
    return 2;
  printf("name\tstatus\tr\tse\twald_lo\twald_hi\tprof_lo\tprof_hi\tsmall_lo"
         "\tsmall_hi\ttheta\tloglik\tdeviance\tdispersion\tevents\tused"
         "\tmissing\tdf\tflags\tintercept\n");
  while (scanf("%255s %63s %d %d %zu %d", name, model, &weekday, &fwd, &n,
               &hasoff) == 6) {
    double *y = malloc((n ? n : 1) * sizeof *y);
    double *off = malloc((n ? n : 1) * sizeof *off);
    if (!y || !off)
      return 2;
    char tok[64];
    for (size_t i = 0; i < n; i++) {
      if (scanf("%63s", tok) != 1)
        return 2;
      y[i] = strcmp(tok, "nan") == 0 ? NAN : strtod(tok, NULL);
    }
    if (hasoff)
      for (size_t i = 0; i < n; i++)
        if (scanf("%lf", &off[i]) != 1)
          return 2;
    int m = twofold_model_from_string(model);
    if (m < 0 || twofold_fit_options_set_model(o, m) ||
        twofold_fit_options_set_weekday(o, weekday))
      return 2;
    int rc = twofold_growth_fit(fit, o, y, hasoff ? off : NULL, n, fwd);
    double wl, wh, pl, ph, sl, sh;
    twofold_fit_interval(fit, TWOFOLD_INTERVAL_WALD, &wl, &wh);
    twofold_fit_interval(fit, TWOFOLD_INTERVAL_PROFILE, &pl, &ph);
    twofold_fit_interval(fit, TWOFOLD_INTERVAL_SMALL, &sl, &sh);
    printf("%s\t%s\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g"
           "\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%zu\t%zu\t%.17g\t%u\t%.17g\n",
           name, twofold_err_name(rc), twofold_fit_rate(fit),
           twofold_fit_rate_se(fit), wl, wh, pl, ph, sl, sh,
           twofold_fit_theta(fit), twofold_fit_loglik(fit),
           twofold_fit_deviance(fit), twofold_fit_dispersion(fit),
           twofold_fit_events(fit), twofold_fit_days_used(fit),
           twofold_fit_days_missing(fit), twofold_fit_df_residual(fit),
           twofold_fit_flags(fit), twofold_fit_intercept(fit));
    if (rc)
      fprintf(stderr, "%s: %s\n", name, twofold_fit_errmsg(fit));
    free(y);
    free(off);
  }
  twofold_fit_free(fit);
  twofold_fit_options_free(o);
  return 0;
}
