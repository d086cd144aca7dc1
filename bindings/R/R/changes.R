# SPDX-License-Identifier: GPL-3.0-or-later

find_changes <- function(counts, dates = NULL, start = NULL, kind = NULL,
                         weekday = NULL, rate_prior = NULL,
                         level_prior = NULL, changes_per_year = NULL,
                         change_prob = NULL, min_segment = NULL,
                         length_shape = NULL, dispersion = NULL,
                         prune = NULL, max_changes = NULL, level = NULL,
                         grid = NULL) {
    d <- tf_daily(counts, dates, start)
    num <- function(x) if (is.null(x)) NULL else as.double(x)
    opts <- list(kind = kind,
                 weekday = if (is.null(weekday)) NULL else as.integer(isTRUE(weekday)),
                 rate_prior = num(rate_prior), level_prior = num(level_prior),
                 changes_per_year = num(changes_per_year),
                 change_prob = num(change_prob), min_segment = min_segment,
                 length_shape = length_shape, dispersion = num(dispersion),
                 prune = num(prune), max_changes = max_changes,
                 level = num(level), grid = grid)
    res <- tf_check(.Call(tfr_changes, d$y, tf_weekday(d$first_day), opts))
    day <- function(i) tf_as_date(d$first_day + i)
    n <- length(d$y)
    list(
        kind = res$kind,
        days = data.frame(date = day(seq_len(n) - 1L),
                          p_change = res$p_change, rate = res$rate,
                          lo = res$lo, hi = res$hi,
                          doubling_time = res$doubling_time,
                          doubling_lo = res$doubling_lo,
                          doubling_hi = res$doubling_hi, sense = res$sense),
        changes = data.frame(date = day(res$change_day),
                             from = day(res$change_from),
                             to = day(res$change_to),
                             prob = res$change_prob),
        segments = data.frame(start = day(res$seg_start),
                              end = day(res$seg_end), rate = res$seg_rate,
                              lo = res$seg_lo, hi = res$seg_hi,
                              level = res$seg_level),
        count = data.frame(changes = seq_along(res$count_prob) - 1L,
                           prob = res$count_prob),
        count_tail = res$count_tail, count_mean = res$count_mean,
        dispersion = res$dispersion,
        weekday_effects = tf_weekday_names(res$weekday_effects),
        log_evidence = res$log_evidence)
}
