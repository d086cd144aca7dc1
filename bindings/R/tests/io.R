# SPDX-License-Identifier: GPL-3.0-or-later
# Type and error translation: CSV input, Date columns, library errors as R
# errors, doubling times against the handbook formula ln 2 / r.
library(twofold)

f <- tempfile(fileext = ".csv")
writeLines(c("region,date,cases,admissions",
             "North,2025-01-01,5,1",
             "North,2025-01-02,7,0",
             "South,2025-01-01,3,0",
             "North,2025-01-04,9,2"), f)
d <- read_counts(f)
stopifnot(identical(names(d), c("region", "date", "cases", "admissions")),
          inherits(d$date, "Date"),
          nrow(d) == 5,
          identical(d$region, c("North", "North", "North", "North", "South")),
          d$date[3] == as.Date("2025-01-03"),
          is.na(d$cases[3]),               # a missing date is NA, not 0
          identical(d$cases[c(1, 2, 4, 5)], c(5, 7, 9, 3)))

## a bad date on line 6: an R error with the library's FILE:LINE: message
cat("South,2025-02-30,4,0\n", file = f, append = TRUE)
e <- tryCatch(read_counts(f), error = function(e) e)
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_EDATE",
          e$line == 6L, grepl(":6:", conditionMessage(e), fixed = TRUE),
          grepl(basename(f), conditionMessage(e), fixed = TRUE))
unlink(f)

## invalid counts and unfit windows are R errors with the library's status
e <- tryCatch(fit_growth(c(1, -2, 3), start = "2025-01-06"),
              error = function(e) e)
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_ECOUNT")
e <- tryCatch(fit_growth(rep(0L, 28), start = "2025-01-06", model = "poisson"),
              error = function(e) e)
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_EZERO",
          nchar(conditionMessage(e)) > 0)
e <- tryCatch(fit_growth(rep(5, 28), start = "2025-01-06", model = "gamma"),
              error = function(e) e)
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_EINVAL")

## doubling times: handbook formula ln 2 / r, halving ln 2 / |r|
dt <- doubling_time(c(0.05, -0.02, 0.01, NA), c(0.03, -0.03, -0.01, NA),
                    c(0.07, -0.01, 0.03, NA))
stopifnot(all.equal(dt$time[1:2], log(2) / c(0.05, 0.02), tolerance = 1e-12),
          all.equal(dt$lo[1], log(2) / 0.07, tolerance = 1e-12),
          all.equal(dt$hi[1], log(2) / 0.03, tolerance = 1e-12),
          identical(dt$sense[1:3], c(1L, -1L, 1L)),
          is.infinite(dt$hi[3]), dt$lo[3] > 0, is.na(dt$time[4]))

## reproduction number, gamma interval: R = (1 + r * scale)^shape
## (Wallinga & Lipsitch 2007, Proc R Soc B 274:599-604)
k <- (5 / 2)^2; s <- 2^2 / 5
R <- reproduction_number(c(0.05, 0.02, -0.1), gi_mean = 5, gi_sd = 2)
stopifnot(all.equal(R$R, (1 + c(0.05, 0.02, -0.1) * s)^k, tolerance = 1e-9))

## rolling fits: dates as a Date column, status names from the library
set.seed(4)
y <- rpois(40, 30 * exp(0.03 * (0:39)))
r <- roll_growth(y, 14, start = as.Date("2025-01-06"), model = "poisson")
stopifnot(nrow(r) == 40, inherits(r$date, "Date"),
          r$date[1] == as.Date("2025-01-06"),
          all(is.na(r$rate[1:13])), all(r$status[1:13] != "TWOFOLD_OK"),
          all(r$status[14:40] == "TWOFOLD_OK"),
          all(r$lo[14:40] < r$rate[14:40] & r$rate[14:40] < r$hi[14:40]))
## the last rolling estimate is the window fit of the last 14 days
w <- fit_growth(y[27:40], start = as.Date("2025-01-06") + 26, model = "poisson")
stopifnot(isTRUE(all.equal(w$rate, r$rate[40], tolerance = 1e-12)))
cat("io checks passed\n")

## changepoints: an invented series with one change on day 61 (2025-03-07)
set.seed(5)
day <- 0:119
y <- rpois(120, 50 * exp(ifelse(day < 60, 0.03 * day, 1.8 - 0.04 * (day - 60))))
cp <- find_changes(y, start = as.Date("2025-01-06"), kind = "jump")
stopifnot(cp$kind == "jump", nrow(cp$days) == 120,
          inherits(cp$days$date, "Date"), cp$days$p_change[1] == 0,
          nrow(cp$changes) == 1,
          abs(as.numeric(cp$changes$date - as.Date("2025-03-07"))) <= 3,
          cp$changes$from <= cp$changes$date, cp$changes$date <= cp$changes$to,
          nrow(cp$segments) == 2,
          abs(sum(cp$count$prob) + cp$count_tail - 1) < 1e-9)
e <- tryCatch(find_changes(y, start = "2025-01-06", min_segment = 0),
              error = function(e) e)
stopifnot(inherits(e, "twofold_error"), e$name == "TWOFOLD_ERANGE")
cat("changepoint checks passed\n")
