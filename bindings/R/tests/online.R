# SPDX-License-Identifier: GPL-3.0-or-later
# The online changepoint filter (Fearnhead & Liu 2007, JRSS B 69:589-605)
# against the offline posterior of find_changes (the exact recursions of
# Fearnhead 2006, Statistics and Computing 16:203-213) on an invented
# series (R's set.seed, Poisson counts whose growth rate changes from
# +0.03 to -0.04 per day on day 61).
#
# The checks are identities, not values copied from our output:
#   - chain rule of probability: log p(y_1..n) is the sum over t of
#     log p(y_t | y_1..t-1), so the filter's one-step log predictives add
#     up to the offline log evidence when the filter keeps every candidate
#     (no resampling: 1000 candidates for 120 days) and pruning is off
#     (include/twofold.h, libtwofold(3));
#   - P(a regime started within the last 7 days) is the sum of the offline
#     P(day i starts a regime) over those 7 days, because segments of at
#     least 7 days (the default minimum) allow at most one change in them,
#     so the events are disjoint.
library(twofold)

check <- function(what, got, want, tol) {
    cat(sprintf("%-40s online %.12g  offline %.12g  abs.diff %.2e\n",
                what, got, want, abs(got - want)))
    if (!is.finite(got) || !(abs(got - want) < tol))
        stop(sprintf("FAIL: %s differs: %.15g vs %.15g", what, got, want))
}

start <- as.Date("2025-01-06")
n <- 120L
day <- 0:(n - 1L)
set.seed(20251201)
y <- rpois(n, 50 * exp(ifelse(day < 60, 0.03 * day,
                              1.8 - 0.04 * (day - 60))))

off <- find_changes(y, start = start, prune = 0, weekday = FALSE,
                    dispersion = 1, level_prior = c(1, 0.02))
on <- online_changes(1000, 1, start = start, prune = 0, weekday = FALSE,
                     dispersion = 1, level_prior = c(1, 0.02))
stopifnot(inherits(on, "twofold_online"), online_days(on) == 0,
          is.na(online_log_predictive(on)), is.na(online_last_date(on)))
total <- 0
for (c in y) {
    online_add(on, c)
    total <- total + online_log_predictive(on)
}
stopifnot(online_days(on) == n, online_last_date(on) == start + n - 1L,
          online_candidates(on) >= 1, online_candidates(on) <= 1000)
check("sum of log predictives vs log evidence", total, off$log_evidence,
      1e-7)
check("P(change in last 7 days)", online_p_recent(on, 7),
      sum(tail(off$days$p_change, 7)), 1e-9)
check("P(change today)", online_p_recent(on, 1),
      tail(off$days$p_change, 1), 1e-9)
pr <- online_p_recent(on, c(1, 7))
stopifnot(length(pr) == 2L, identical(pr[2], online_p_recent(on, 7)))

g <- online_growth(on)
print(g)
stopifnot(is.data.frame(g), nrow(g) == 1L,
          identical(names(g), c("date", "rate", "lo", "hi")),
          inherits(g$date, "Date"), g$date == start + n - 1L,
          g$lo <= g$rate, g$rate <= g$hi,
          g$lo <= -0.04, -0.04 <= g$hi)      # the invented truth
print(on)

## several days at once: the same filter state as one day at a time
on2 <- online_changes(1000, 1, start = start, prune = 0, weekday = FALSE,
                      dispersion = 1, level_prior = c(1, 0.02))
online_add(on2, y[1:100])
online_add(on2, as.integer(y[101:n]))
stopifnot(online_days(on2) == n,
          identical(online_log_predictive(on2), online_log_predictive(on)),
          identical(online_p_recent(on2, 7), online_p_recent(on, 7)))

## history with dates; missing days (NA) are accepted
h <- y[1:90]
h[10] <- NA
onh <- online_changes(50, 7, history = h, dates = start + 0:89,
                      kind = "jump")
stopifnot(online_days(onh) == 90, online_last_date(onh) == start + 89L)
online_add(onh, c(y[91:95], NA))
stopifnot(online_days(onh) == 96, online_candidates(onh) <= 50,
          is.na(online_log_predictive(onh)) ||
              is.finite(online_log_predictive(onh)))

## errors carry the library's message
expect_error <- function(expr, pattern) {
    e <- tryCatch({ expr; NULL }, error = function(e) e)
    if (is.null(e))
        stop("FAIL: no error (expected one matching ", pattern, ")")
    if (!grepl(pattern, conditionMessage(e)))
        stop("FAIL: error '", conditionMessage(e), "' does not match ",
             pattern)
    cat("error as expected:", conditionMessage(e), "\n")
    invisible(e)
}
bad <- online_changes(50, 3, start = start)
online_add(bad, 5)
e <- expect_error(online_add(bad, -1), "count")
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_ECOUNT")
e <- expect_error(online_add(bad, 1.5), "count")
stopifnot(inherits(e, "twofold_error"), online_days(bad) == 1)
expect_error(online_changes(50, 3, history = c(4, -1, 3), start = start),
             "count")
expect_error(online_growth(online_changes(50, 3, start = start)),
             "no day")
expect_error(online_p_recent(bad, 0), "k must")
expect_error(online_changes(1, 3, start = start), "max_candidates")
expect_error(online_changes(50, 3), "weekday")
expect_error(online_changes(50, 3, start = start, kind = "sideways"),
             "TWOFOLD_E")
expect_error(online_add(list(), 1), "online_changes")
cat("online filter checks passed\n")
