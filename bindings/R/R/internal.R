# SPDX-License-Identifier: GPL-3.0-or-later
# Type and error translation shared by the exported functions.  No
# statistics here: every number comes from libtwofold.

# Raise a "twofold_error" condition for a status list from the C glue.
tf_check <- function(res, call = sys.call(-1L)) {
    if (inherits(res, "twofold_status")) {
        cond <- structure(
            class = c("twofold_error", "error", "condition"),
            list(message = paste0(res$message, " (", res$name, ")"),
                 call = call, code = res$code, name = res$name,
                 line = res$line, column = res$column))
        stop(cond)
    }
    res
}

tf_error <- function(name, message, call = sys.call(-1L)) {
    stop(structure(class = c("twofold_error", "error", "condition"),
                   list(message = paste0(message, " (TWOFOLD_", name, ")"),
                        call = call, code = NA_integer_,
                        name = paste0("TWOFOLD_", name),
                        line = NA_integer_, column = NA_integer_)))
}

# Days since 1970-01-01 (R's Date and twofold's day number agree).
tf_day <- function(x, what = "date") {
    d <- tryCatch(as.Date(x), error = function(e)
        tf_error("EDATE", sprintf("cannot read %s %s as a date", what,
                                  deparse(x)[1L])))
    if (anyNA(d))
        tf_error("EDATE", sprintf("missing or invalid %s", what))
    as.integer(unclass(d))
}

tf_as_date <- function(day) as.Date(as.numeric(day), origin = "1970-01-01")

# Counts as a double vector (integer, double or logical NA accepted);
# checked by the library (twofold_series_from_counts).
tf_counts <- function(counts) {
    if (is.data.frame(counts) || is.list(counts))
        stop("counts must be a numeric vector")
    if (!(is.numeric(counts) || (is.logical(counts) && all(is.na(counts)))))
        stop("counts must be numeric")
    y <- as.double(counts)
    tf_check(.Call(tfr_check_counts, y))
    y
}

# Consecutive daily values from counts and either their dates (any order,
# gaps become NA) or the first date.
tf_daily <- function(counts, dates = NULL, start = NULL) {
    y <- tf_counts(counts)
    if (!is.null(dates)) {
        if (!is.null(start))
            stop("give either dates or start, not both")
        if (length(dates) != length(y))
            stop("dates and counts differ in length")
        d <- tf_day(dates, "dates")
        if (length(d) == 0L)
            return(list(y = y, first_day = NA_integer_))
        if (anyDuplicated(d))
            tf_error("EDUPLICATE", sprintf("date %s appears twice",
                                           format(tf_as_date(d[anyDuplicated(d)]))))
        first <- min(d)
        out <- rep(NA_real_, max(d) - first + 1L)
        out[d - first + 1L] <- y
        return(list(y = out, first_day = first))
    }
    if (is.null(start))
        stop("give the dates of the counts (dates =) or the first date (start =)")
    list(y = y, first_day = tf_day(start, "start"))
}

tf_options <- function(model = NULL, level = NULL, weekday = NULL,
                       interval = NULL, min_events = NULL,
                       max_iterations = NULL, tolerance = NULL) {
    list(model = model, level = level, weekday = weekday,
         interval = interval, min_events = min_events,
         max_iterations = max_iterations, tolerance = tolerance)
}

tf_offset <- function(offset, n) {
    if (is.null(offset))
        return(NULL)
    offset <- as.double(offset)
    if (length(offset) != n)
        stop("offset must have one value per day")
    offset
}

tf_weekday <- function(day) .Call(tfr_weekday, as.integer(day))
