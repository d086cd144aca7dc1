# SPDX-License-Identifier: GPL-3.0-or-later

# Changepoint options as the C glue reads them (NULL: library default).
tf_cp_options <- function(kind = NULL, weekday = NULL, rate_prior = NULL,
                          level_prior = NULL, changes_per_year = NULL,
                          change_prob = NULL, min_segment = NULL,
                          length_shape = NULL, dispersion = NULL,
                          prune = NULL, max_changes = NULL, level = NULL,
                          grid = NULL) {
    num <- function(x) if (is.null(x)) NULL else as.double(x)
    list(kind = kind,
         weekday = if (is.null(weekday)) NULL else as.integer(isTRUE(weekday)),
         rate_prior = num(rate_prior), level_prior = num(level_prior),
         changes_per_year = num(changes_per_year),
         change_prob = num(change_prob), min_segment = min_segment,
         length_shape = length_shape, dispersion = num(dispersion),
         prune = num(prune), max_changes = max_changes,
         level = num(level), grid = grid)
}

# The changepoint options named like tf_cp_options's arguments, taken from
# env (the frame of a function that has arguments of those names).
tf_cp_options_from <- function(env) {
    do.call(tf_cp_options, mget(names(formals(tf_cp_options)), envir = env))
}

find_changes <- function(counts, dates = NULL, start = NULL, kind = NULL,
                         weekday = NULL, rate_prior = NULL,
                         level_prior = NULL, changes_per_year = NULL,
                         change_prob = NULL, min_segment = NULL,
                         length_shape = NULL, dispersion = NULL,
                         prune = NULL, max_changes = NULL, level = NULL,
                         grid = NULL) {
    d <- tf_daily(counts, dates, start)
    opts <- tf_cp_options_from(environment())
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

# ---- online filter (twofold_online_*) ---------------------------------
# A "twofold_online" object is a list holding the library's filter (an
# external pointer freed by its finalizer) and the day number of the
# filter's first day (NA without dates).  Adding days changes the filter
# in place, for every copy of the object.

online_changes <- function(max_candidates, seed, history = NULL,
                           dates = NULL, start = NULL, kind = NULL,
                           weekday = NULL, rate_prior = NULL,
                           level_prior = NULL, changes_per_year = NULL,
                           change_prob = NULL, min_segment = NULL,
                           length_shape = NULL, dispersion = NULL,
                           prune = NULL, max_changes = NULL, level = NULL,
                           grid = NULL) {
    if (is.null(dates) && is.null(start)) {
        if (!identical(weekday, FALSE))
            stop("weekday effects need the dates: give start = (or dates = ",
                 "with the history), or weekday = FALSE")
        d <- list(y = if (is.null(history)) NULL else tf_counts(history),
                  first_day = NA_integer_)
        first_weekday <- 1L
    } else {
        if (is.null(history)) {
            if (!is.null(dates))
                stop("dates are those of the history; without history give ",
                     "start =, the date of the first day to be added")
            d <- list(y = NULL, first_day = tf_day(start, "start"))
        } else {
            d <- tf_daily(history, dates, start)
        }
        first_weekday <- if (is.na(d$first_day)) 1L else
            tf_weekday(d$first_day)
    }
    opts <- tf_cp_options_from(environment())
    ptr <- tf_check(.Call(tfr_online_new, d$y, first_weekday,
                          max_candidates, seed, opts))
    structure(list(ptr = ptr, first_day = as.integer(d$first_day)),
              class = "twofold_online")
}

tf_online <- function(filter) {
    if (!inherits(filter, "twofold_online"))
        stop("filter must be made by online_changes()")
    filter$ptr
}

online_add <- function(filter, counts) {
    p <- tf_online(filter)
    if (is.data.frame(counts) || is.list(counts))
        stop("counts must be a numeric vector")
    if (!(is.numeric(counts) || (is.logical(counts) && all(is.na(counts)))))
        stop("counts must be numeric")
    tf_check(.Call(tfr_online_add, p, as.double(counts)))
    invisible(filter)
}

online_days <- function(filter)
    tf_check(.Call(tfr_online_state, tf_online(filter)))$days

online_candidates <- function(filter)
    tf_check(.Call(tfr_online_state, tf_online(filter)))$candidates

online_log_predictive <- function(filter)
    tf_check(.Call(tfr_online_state, tf_online(filter)))$log_predictive

online_last_date <- function(filter) {
    n <- online_days(filter)
    if (n == 0 || is.na(filter$first_day))
        return(tf_as_date(NA_real_))
    tf_as_date(filter$first_day + n - 1)
}

online_p_recent <- function(filter, k) {
    p <- tf_online(filter)
    if (!is.numeric(k))
        stop("k must be numeric")
    tf_check(.Call(tfr_online_p_recent, p, as.double(k)))
}

online_growth <- function(filter) {
    g <- tf_check(.Call(tfr_online_growth, tf_online(filter)))
    data.frame(date = online_last_date(filter), rate = g[[1]], lo = g[[2]],
               hi = g[[3]])
}

print.twofold_online <- function(x, ...) {
    n <- online_days(x)
    last <- online_last_date(x)
    cat(sprintf("twofold online changepoint filter: %d day%s%s, %d candidate%s\n",
                as.integer(n), if (n == 1) "" else "s",
                if (is.na(last)) "" else paste0(" to ", format(last)),
                as.integer(online_candidates(x)),
                if (online_candidates(x) == 1) "" else "s"))
    invisible(x)
}
