# Reference values from base R for tests/test_dl_against_r.py (distributed lags of PM2.5 on deaths).
#
# Invocation (from the repository root; writes the committed JSON):
#
#   python tests/reference/make_dl_input.py /tmp/dl_input.csv
#   Rscript tests/reference/dl_reference.R /tmp/dl_input.csv tests/reference/dl_reference.json
#
# Needs only base R and the splines package. Source: base R glm (R Core Team, R: A Language and
# Environment for Statistical Computing), splines::ns.
#
# What it does, independently of airhealth:
# 1. Reads the daily Norhaven table (date, deaths_all, pm25, temperature; one row per calendar day).
# 2. Builds the explicit lag columns in R: lag k is the value k rows (= days) earlier, NA before the first
#    day; the mean temperature over lags 1-3 is NA when any of its days is NA.
# 3. Confounders as issue 2 describes, built by R inside the formula (so model.frame() evaluates ns() on
#    the full calendar, knots from all non-missing values, before na.omit drops incomplete rows):
#    ns(time, df = round(7 * n / 365.25)) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow).
# 4. Fits glm(family = quasipoisson) with
#    - "dl0-5": the six explicit columns pm25 lag0..lag5 (one coefficient per lag);
#    - "dl0-7:poly3": the columns Q %*% C, Q the lag-0..7 matrix and C = [1, l, l^2, l^3] (raw powers of
#      the lag, Almon 1965), per-lag curve C theta;
#    - "dl0-21:spline4" and "dl0-21:spline4:log" (airhealth's knot_spacing="log"): C = ns(0:21, knots,
#      Boundary.knots = c(0, 21), intercept = TRUE), with the interior knots placed by the rule documented in
#      airhealth/model/distributed_lags.py (equally spaced over 0..21, or equally spaced on log(1 + lag)).
#    For each: per-lag coefficients C theta with SEs sqrt(diag(C V C')), and the cumulative effect
#    1' C theta with SE sqrt(1' C V C' 1), V = vcov(fit) (summary.glm's dispersion) and also V recomputed
#    at the final fitted means.
# Numbers are written with 17 significant digits by the small JSON writer of common.R (base R only).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript dl_reference.R INPUT_CSV OUT_JSON")
suppressPackageStartupMessages(library(splines))
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer

d0 <- read_daily(args[[1]])
n <- nrow(d0)

base <- data.frame(y = d0$deaths_all)
base$time <- seq_len(n)
base$temperature <- d0$temperature
base$temp_mean_lag1_3 <- rowMeans(lag_cols(d0$temperature, 1:3))  # NA if any day is NA
base$dow <- format(d0$date, "%u")
time_df <- as.integer(round(7 * n / 365.25))
confounders <- sprintf("ns(time, df = %d) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow)",
                       time_df)

spline_knots <- function(first, last, df, log_scale) {
  p <- seq_len(df - 2) / (df - 1)
  if (log_scale) first + expm1(p * log1p(last - first)) else first + p * (last - first)
}

lag_bases <- list(
  list(name = "dl0-5", lags = 0:5, C = diag(6)),
  list(name = "dl0-7:poly3", lags = 0:7, C = outer(0:7, 0:3, "^")),
  list(name = "dl0-21:spline4", lags = 0:21,
       knots = spline_knots(0, 21, 4, FALSE)),
  list(name = "dl0-21:spline4:log", lags = 0:21,
       knots = spline_knots(0, 21, 4, TRUE))
)
for (i in seq_along(lag_bases)) {
  b <- lag_bases[[i]]
  if (!is.null(b$knots)) {
    lag_bases[[i]]$C <- unclass(ns(b$lags, knots = b$knots, Boundary.knots = range(b$lags), intercept = TRUE))
  }
}

fit_lag <- function(b) {
  d <- base
  Q <- lag_cols(d0$pm25, b$lags)
  C <- as.matrix(b$C)
  k <- ncol(C)
  xb <- Q %*% C
  for (j in seq_len(k)) d[[sprintf("xb%d", j)]] <- xb[, j]
  xnames <- sprintf("xb%d", seq_len(k))
  f <- as.formula(paste("y ~", paste(xnames, collapse = " + "), "+", confounders))
  fit <- glm(f, family = quasipoisson(), data = d, control = strict)
  V <- vcov(fit)[xnames, xnames, drop = FALSE]
  theta <- coef(fit)[xnames]
  # covariance at the final fitted means (summary.glm uses the weights from the start of the last step)
  phi <- pearson_dispersion(fit)
  V_final <- cov_at_fitted(model.matrix(fit), fitted(fit), phi)[xnames, xnames, drop = FALSE]
  w <- colSums(C)
  list(
    name = b$name, lags = b$lags, n_params = k,
    knots = if (is.null(b$knots)) NULL else b$knots,
    formula = paste(deparse(f, width.cutoff = 500L), collapse = ""),
    theta = unname(theta),
    lag_coef = as.numeric(C %*% theta),
    lag_se = sqrt(diag(C %*% V %*% t(C))),
    lag_se_final_mu = sqrt(diag(C %*% V_final %*% t(C))),
    cumulative_coef = sum(w * theta),
    cumulative_se = sqrt(as.numeric(t(w) %*% V %*% w)),
    cumulative_se_final_mu = sqrt(as.numeric(t(w) %*% V_final %*% w)),
    dispersion = summary(fit)$dispersion, dispersion_final_mu = phi,
    deviance = deviance(fit), df_resid = df.residual(fit), n_used = length(fit$y),
    n_coef = length(coef(fit)), converged = fit$converged
  )
}
fits <- lapply(lag_bases, fit_lag)

for (i in seq_along(fits)) {
  for (key in c("lags", "knots", "theta", "lag_coef", "lag_se", "lag_se_final_mu")) {
    if (!is.null(fits[[i]][[key]])) fits[[i]][[key]] <- as_array(fits[[i]][[key]])
  }
}
doc <- list(
  source = "base R glm (R Core Team, R: A Language and Environment for Statistical Computing), splines::ns",
  r_version = R.version.string,
  invocation = paste("python tests/reference/make_dl_input.py /tmp/dl_input.csv &&",
                     "Rscript tests/reference/dl_reference.R /tmp/dl_input.csv tests/reference/dl_reference.json"),
  n_calendar_days = n,
  time_df = time_df,
  glm_epsilon = 1e-12,
  fits = fits
)
write_json(doc, args[[2]], drop_null = TRUE)
