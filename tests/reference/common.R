# Helpers shared by the R reference scripts of this folder (base R only). Each script sources this file
# from its own folder:
#
#   source(file.path(dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))), "common.R"))
#
# Nothing here fits a model: the scripts keep their own formulas, so each reads as its own derivation.

# ------------------------------------------------------------------------------------------ reading
# A daily table written by a tests/reference/make_*_input.py script: one row per calendar day, "NA" missing.
read_daily <- function(path) {
  d <- read.csv(path, stringsAsFactors = FALSE, na.strings = "NA")
  d$date <- as.Date(d$date)
  stopifnot(all(diff(d$date) == 1))
  d
}

# The three Norhaven sample tables (counts, pollution, weather) of DATA_DIR merged on the complete daily
# calendar from the first to the last date (days absent from a table get NA).
read_sample_calendar <- function(data_dir) {
  read_table <- function(file) {
    d <- read.csv(file.path(data_dir, file), stringsAsFactors = FALSE)
    d$date <- as.Date(d$date)
    d
  }
  tables <- lapply(c("norhaven_counts.csv", "norhaven_pollution.csv", "norhaven_weather.csv"), read_table)
  dates <- do.call(c, lapply(tables, function(tab) tab$date))
  calendar <- data.frame(date = seq(min(dates), max(dates), by = "day"))
  for (tab in tables) {
    rows <- match(calendar$date, tab$date)
    for (col in setdiff(names(tab), "date")) calendar[[col]] <- tab[[col]][rows]
  }
  calendar
}

# --------------------------------------------------------------------------------------------- lags
# Lag k of a daily series: the value k rows (= days) earlier, NA before the first day.
lag_k <- function(x, k) if (k == 0) x else c(rep(NA_real_, k), head(x, length(x) - k))
lag_cols <- function(x, lags) sapply(lags, function(k) lag_k(x, k))  # n x length(lags)
lag_mean <- function(x, a, b) rowMeans(lag_cols(x, a:b))  # NA if any day of lags a..b is NA

# ------------------------------------------------------------------------------------------ fitting
strict <- glm.control(epsilon = 1e-12, maxit = 100)

# The Pearson dispersion and the covariance (X' W X)^-1 phi at the final fitted means mu (summary.glm uses
# the weights from the start of the last iteration).
pearson_dispersion <- function(fit) sum((fit$y - fitted(fit))^2 / fitted(fit)) / df.residual(fit)
cov_at_fitted <- function(X, mu, phi) solve(crossprod(X * sqrt(mu))) * phi

# --------------------------------------------------------------------------------------------- JSON
# A small JSON writer: numbers with 17 significant digits, NA as null, a matrix as a list of rows; a vector
# of length one is a scalar unless marked by as_array(). drop_null = TRUE leaves out the NULL entries of
# named lists (else they are written as null).
as_array <- function(v) structure(v, array = TRUE)
json <- function(v, drop_null = FALSE) {
  if (is.null(v)) return("null")
  if (is.list(v)) {
    if (!is.null(names(v))) {
      keep <- if (drop_null) names(v)[!vapply(v, is.null, TRUE)] else names(v)
      items <- vapply(keep, function(k) paste0('"', k, '": ', json(v[[k]], drop_null)), "")
      return(paste0("{", paste(items, collapse = ", "), "}"))
    }
    return(paste0("[", paste(vapply(v, json, "", drop_null = drop_null), collapse = ", "), "]"))
  }
  if (is.matrix(v)) return(json(lapply(seq_len(nrow(v)), function(i) as_array(as.numeric(v[i, ]))), drop_null))
  scalar <- function(z) {
    if (is.na(z)) return("null")
    if (is.logical(z)) return(if (z) "true" else "false")
    if (is.character(z)) return(paste0('"', gsub('"', '\\\\"', z), '"'))
    sprintf("%.17g", z)
  }
  parts <- vapply(as.list(v), scalar, "")
  if (length(v) == 1 && is.null(attr(v, "array"))) return(parts)
  paste0("[", paste(parts, collapse = ", "), "]")
}
write_json <- function(doc, path, drop_null = FALSE) writeLines(json(doc, drop_null), path)
