# SPDX-License-Identifier: GPL-3.0-or-later

twofold_version <- function() .Call(tfr_version)

read_counts <- function(file, layout = "auto", region = NULL, date = NULL,
                        count = NULL) {
    if (!is.character(file) || length(file) != 1L)
        stop("file must be a single file name")
    res <- tf_check(.Call(tfr_read, file, layout, region, date, count))
    parts <- lapply(res, function(s) {
        n <- length(s$columns[[1L]])
        df <- data.frame(region = rep(s$region, n),
                         date = tf_as_date(s$first_day + seq_len(n) - 1L),
                         stringsAsFactors = FALSE)
        for (nm in names(s$columns))
            df[[nm]] <- s$columns[[nm]]
        df
    })
    if (length(parts) == 0L)
        return(data.frame(region = character(), date = as.Date(character())))
    out <- do.call(rbind, parts)
    rownames(out) <- NULL
    out
}

fit_growth <- function(counts, dates = NULL, start = NULL, model = NULL,
                       level = NULL, weekday = NULL, interval = NULL,
                       offset = NULL, min_events = NULL,
                       max_iterations = NULL, tolerance = NULL) {
    d <- tf_daily(counts, dates, start)
    n <- length(d$y)
    opts <- tf_options(model, level, weekday, interval, min_events,
                       max_iterations, tolerance)
    res <- tf_check(.Call(tfr_fit, d$y, tf_offset(offset, n),
                          tf_weekday(d$first_day), opts))
    dt <- doubling_time(res$rate, res$lo, res$hi)
    out <- data.frame(
        start = tf_as_date(d$first_day),
        end = tf_as_date(d$first_day + n - 1L),
        model = res$model, rate = res$rate, se = res$se,
        lo = res$lo, hi = res$hi, level = res$level,
        interval = res$interval,
        wald_lo = res$wald_lo, wald_hi = res$wald_hi,
        doubling_time = dt$time, doubling_lo = dt$lo, doubling_hi = dt$hi,
        sense = dt$sense, theta = res$theta, dispersion = res$dispersion,
        events = res$events, days_used = res$days_used,
        days_missing = res$days_missing, df_residual = res$df_residual,
        loglik = res$loglik, deviance = res$deviance,
        iterations = res$iterations, intercept = res$intercept,
        flags = paste(res$flags, collapse = ","),
        stringsAsFactors = FALSE)
    attr(out, "weekday_effects") <- tf_weekday_names(res$weekday_effects)
    out
}

tf_weekday_names <- function(x) {
    names(x) <- c("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
    x
}

roll_growth <- function(counts, window, dates = NULL, start = NULL,
                        align = "trailing", model = NULL, level = NULL,
                        weekday = NULL, interval = NULL, offset = NULL,
                        min_events = NULL, max_iterations = NULL,
                        tolerance = NULL) {
    d <- tf_daily(counts, dates, start)
    n <- length(d$y)
    opts <- tf_options(model, level, weekday, interval, min_events,
                       max_iterations, tolerance)
    res <- tf_check(.Call(tfr_roll, d$y, tf_offset(offset, n),
                          tf_weekday(d$first_day), window, align, opts))
    dt <- doubling_time(res$rate, res$lo, res$hi)
    data.frame(date = tf_as_date(d$first_day + seq_len(n) - 1L),
               rate = res$rate, lo = res$lo, hi = res$hi,
               doubling_time = dt$time, doubling_lo = dt$lo,
               doubling_hi = dt$hi, sense = dt$sense,
               status = res$status, stringsAsFactors = FALSE)
}

doubling_time <- function(rate, lo = rate, hi = rate) {
    n <- max(length(rate), length(lo), length(hi))
    r <- rep_len(as.double(rate), n)
    l <- rep_len(as.double(lo), n)
    h <- rep_len(as.double(hi), n)
    res <- tf_check(.Call(tfr_doubling, r, l, h))
    data.frame(time = res$time, lo = res$lo, hi = res$hi, sense = res$sense)
}

reproduction_number <- function(rate, lo = NULL, hi = NULL, gi_mean = NULL,
                                gi_sd = NULL, gi_p = NULL) {
    if (is.null(gi_p) && (is.null(gi_mean) || is.null(gi_sd)))
        stop("give gi_mean and gi_sd (gamma) or gi_p (discrete)")
    if (xor(is.null(lo), is.null(hi)))
        stop("give both lo and hi, or neither")
    n <- max(length(rate), length(lo), length(hi))
    r <- rep_len(as.double(rate), n)
    if (!is.null(lo)) {
        lo <- rep_len(as.double(lo), n)
        hi <- rep_len(as.double(hi), n)
    }
    res <- tf_check(.Call(tfr_reproduction, r, lo, hi,
                          if (is.null(gi_mean)) NULL else as.double(gi_mean),
                          if (is.null(gi_sd)) NULL else as.double(gi_sd),
                          if (is.null(gi_p)) NULL else as.double(gi_p)))
    out <- data.frame(R = res$R)
    if (!is.null(lo)) {
        out$lo <- res$lo
        out$hi <- res$hi
    }
    out
}

latest_growth <- function(data, window, region = "region", date = "date",
                          count = NULL, ...) {
    if (is.character(data) && length(data) == 1L)
        data <- read_counts(data, region = region, date = date, count = count)
    if (!is.data.frame(data))
        stop("data must be a data.frame or a CSV file name")
    for (col in c(region, date))
        if (!col %in% names(data))
            tf_error("ECOLUMN", sprintf("no column '%s'", col))
    if (is.null(count)) {
        others <- setdiff(names(data), c(region, date))
        if (length(others) == 0L)
            tf_error("ECOLUMN", "no count column")
        count <- others[1L]
    } else if (!count %in% names(data)) {
        tf_error("ECOLUMN", sprintf("no column '%s'", count))
    }
    window <- as.integer(window)
    keys <- as.character(data[[region]])
    rows <- lapply(unique(keys), function(k) {
        sub <- data[keys == k, , drop = FALSE]
        d <- tf_daily(sub[[count]], sub[[date]])
        n <- min(window, length(d$y))
        first <- d$first_day + length(d$y) - n
        y <- d$y[(length(d$y) - n + 1L):length(d$y)]
        fit <- tryCatch(fit_growth(y, start = tf_as_date(first), ...),
                        twofold_error = function(e) e)
        if (inherits(fit, "twofold_error")) {
            data.frame(region = k, start = tf_as_date(first),
                       end = tf_as_date(first + n - 1L), rate = NA_real_,
                       lo = NA_real_, hi = NA_real_,
                       doubling_time = NA_real_, doubling_lo = NA_real_,
                       doubling_hi = NA_real_, sense = NA_integer_,
                       model = NA_character_, status = fit$name,
                       message = conditionMessage(fit),
                       stringsAsFactors = FALSE)
        } else {
            data.frame(region = k, start = fit$start, end = fit$end,
                       rate = fit$rate, lo = fit$lo, hi = fit$hi,
                       doubling_time = fit$doubling_time,
                       doubling_lo = fit$doubling_lo,
                       doubling_hi = fit$doubling_hi, sense = fit$sense,
                       model = fit$model, status = "TWOFOLD_OK",
                       message = "", stringsAsFactors = FALSE)
        }
    })
    out <- do.call(rbind, rows)
    rownames(out) <- NULL
    out
}
