# SPDX-License-Identifier: GPL-3.0-or-later
# Growth rate and Wald interval from twofold against two references fitted
# live on the same invented window (R's set.seed, fixed seeds below):
#   - stats::glm, family poisson, y ~ day + factor(weekday)   (R core)
#   - MASS::glm.nb, NB2 with theta by maximum likelihood, same formula
#     (Venables & Ripley 2002, Modern Applied Statistics with S; Debian
#     r-cran-mass).  Wald interval = coef +- qnorm(0.975) * SE, as
#     stats::confint.default gives it.
library(twofold)
if (!requireNamespace("MASS", quietly = TRUE))
    stop("FAIL: MASS (Debian r-cran-mass) is required for the reference check")

rel <- function(a, b) abs(a - b) / abs(b)
check <- function(what, got, want, tol = 1e-6) {
    cat(sprintf("%-28s twofold %.12g  reference %.12g  rel.diff %.2e\n",
                what, got, want, rel(got, want)))
    if (!is.finite(got) || !(rel(got, want) < tol))
        stop(sprintf("FAIL: %s differs: %.15g vs %.15g", what, got, want))
}

start <- as.Date("2025-03-03")           # a Monday
n <- 28L
dates <- start + 0:(n - 1L)
day <- 0:(n - 1L)
iso <- as.integer(format(dates, "%u"))   # 1 = Monday, locale-independent
wday <- factor(iso)
effect <- c(0.15, 0.1, 0.05, 0, -0.05, -0.25, -0.3)[iso]
ctl <- glm.control(epsilon = 1e-13, maxit = 100)

## Poisson: stats::glm
set.seed(20250917)
y <- rpois(n, 60 * exp(0.035 * day + effect))
g <- stats::glm(y ~ day + wday, family = stats::poisson(), control = ctl)
ci <- stats::confint.default(g)["day", ]
fit <- fit_growth(y, dates = dates, model = "poisson", interval = "wald")
check("poisson rate", fit$rate, coef(g)[["day"]])
check("poisson se", fit$se, sqrt(diag(stats::vcov(g)))[["day"]])
check("poisson wald lo", fit$lo, ci[[1]])
check("poisson wald hi", fit$hi, ci[[2]])
stopifnot(fit$model == "poisson", fit$interval == "wald",
          fit$start == start, fit$end == start + n - 1L)

## integer and double counts give the same fit
stopifnot(is.integer(y))
fit_d <- fit_growth(as.double(y), start = start, model = "poisson",
                    interval = "wald")
stopifnot(identical(fit_d$rate, fit$rate), identical(fit_d$lo, fit$lo))

## missing days: NA counts and dates absent from the vector are missing
ym <- y
ym[c(4, 15)] <- NA
keep <- -c(4, 15, 20)
gm <- stats::glm(ym ~ day + wday, family = stats::poisson(), control = ctl,
                 subset = -20)
fm <- fit_growth(ym[keep], dates = dates[keep], model = "poisson",
                 interval = "wald")
check("poisson rate, 3 days missing", fm$rate, coef(gm)[["day"]])
check("poisson se, 3 days missing", fm$se,
      sqrt(diag(stats::vcov(gm)))[["day"]])
stopifnot(fm$days_missing == 3, fm$days_used == n - 3, grepl("missing_days", fm$flags))

## Negative binomial: MASS::glm.nb
set.seed(20250918)
yn <- MASS::rnegbin(n, mu = 80 * exp(-0.03 * day + effect), theta = 12)
nb <- MASS::glm.nb(yn ~ day + wday, control = ctl)
cinb <- stats::confint.default(nb)["day", ]
fn <- fit_growth(yn, dates = dates, model = "negbin", interval = "wald")
check("negbin rate", fn$rate, coef(nb)[["day"]])
check("negbin se", fn$se, sqrt(diag(stats::vcov(nb)))[["day"]])
check("negbin wald lo", fn$lo, cinb[[1]])
check("negbin wald hi", fn$hi, cinb[[2]])
check("negbin theta", fn$theta, nb$theta, tol = 1e-5)
stopifnot(fn$model == "negbin")
cat("reference checks passed\n")
