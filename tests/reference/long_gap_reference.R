# Reference values from base R for tests/test_long_gaps.py (a fit across a year-long exposure gap).
#
# Invocation (from the repository root; writes the committed JSON):
#
#   python tests/reference/make_long_gap_input.py /tmp/long_gap_input.csv
#   Rscript tests/reference/long_gap_reference.R /tmp/long_gap_input.csv tests/reference/long_gap_reference.json
#
# Needs only base R and the splines package. Source: base R glm and glm.fit (R Core Team, R: A Language and
# Environment for Statistical Computing; glm.fit's QR with limited column pivoting reports columns that
# the rows used cannot estimate as aliased, coefficient NA), splines::ns.
#
# What it does, independently of airhealth:
# 1. Reads the daily table (date, deaths_all, pm25, temperature; one row per calendar day; pm25 is NA for
#    the whole of 2014).
# 2. Builds in R: the exposure as the mean of lags a..b (NA when any of its days is NA), the day index,
#    the mean temperature over lags 1-3, the day of week.
# 3. Fits glm(y ~ x + ns(time, df = round(7 * n / 365.25)) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6)
#    + factor(dow)) with ns() evaluated inside the formula, so model.frame() computes the bases on the full
#    calendar (knots from every day, including the gap) before na.omit drops the incomplete rows. The time
#    spline columns whose support lies inside the gap are then zero on every row used and glm reports
#    them as aliased (NA).
#    The fit is run twice: with R's default control (epsilon 1e-8, so the QR tolerance is
#    min(1e-7, epsilon/1000) = 1e-11, the rule airhealth follows) to record the aliased columns, and with
#    epsilon 1e-12 for the coefficients to full precision; the script stops if the two disagree on which
#    columns are aliased.
# 4. Writes the exposure coefficient, its SE (summary.glm and recomputed at the final fitted means), the
#    dispersion, deviance, QAIC, days used, residual df and the aliased column names.
# Numbers are written with 17 significant digits by a small JSON writer in base R (no extra packages).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript long_gap_reference.R INPUT_CSV OUT_JSON")
suppressPackageStartupMessages(library(splines))
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer

d0 <- read_daily(args[[1]])
n <- nrow(d0)

time_df <- as.integer(round(7 * n / 365.25))
f <- as.formula(sprintf(
  "y ~ x + ns(time, df = %d) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow)", time_df))

variants <- list(
  list(name = "lag0_1_quasipoisson", lag = c(0, 1), family = "quasipoisson"),
  list(name = "lag0_quasipoisson", lag = c(0, 0), family = "quasipoisson"),
  list(name = "lag0_1_poisson", lag = c(0, 1), family = "poisson")
)

fit_variant <- function(v) {
  d <- data.frame(y = d0$deaths_all, x = lag_mean(d0$pm25, v$lag[1], v$lag[2]), time = seq_len(n),
                  temperature = d0$temperature, temp_mean_lag1_3 = lag_mean(d0$temperature, 1, 3),
                  dow = format(d0$date, "%u"))
  fam <- if (v$family == "poisson") poisson() else quasipoisson()
  default_fit <- glm(f, family = fam, data = d)
  fit <- glm(f, family = fam, data = d, control = strict)
  aliased <- names(coef(default_fit))[is.na(coef(default_fit))]
  stopifnot(identical(aliased, names(coef(fit))[is.na(coef(fit))]))
  s <- summary(fit)
  y <- fit$y
  mu <- fitted(fit)
  X <- model.matrix(fit)[, !is.na(coef(fit))]
  p <- ncol(X)
  phi_final <- if (v$family == "quasipoisson") pearson_dispersion(fit) else 1
  cov_final <- cov_at_fitted(X, mu, phi_final)
  loglik <- sum(dpois(y, mu, log = TRUE))
  list(
    name = v$name, lag = if (v$lag[1] == v$lag[2]) sprintf("%d", v$lag[1]) else sprintf("%d-%d", v$lag[1], v$lag[2]),
    family = v$family, formula = paste(deparse(f, width.cutoff = 500L), collapse = ""),
    coef = unname(coef(fit)["x"]), se = unname(s$coefficients["x", 2]),
    se_final_mu = sqrt(cov_final["x", "x"]),
    dispersion = if (v$family == "quasipoisson") s$dispersion else 1, dispersion_final_mu = phi_final,
    deviance = deviance(fit), df_resid = df.residual(fit), n_used = length(y), n_coef = p,
    # QAIC = -2 log L(Poisson) / dispersion + 2 p (Peng, Dominici & Louis 2006); Poisson AIC when phi = 1
    qaic = -2 * loglik / phi_final + 2 * p,
    aliased = structure(aliased, array = TRUE), converged = fit$converged
  )
}
fits <- lapply(variants, fit_variant)

doc <- list(
  source = "base R glm / glm.fit (R Core Team, R: A Language and Environment for Statistical Computing), splines::ns",
  r_version = R.version.string,
  invocation = paste("python tests/reference/make_long_gap_input.py /tmp/long_gap_input.csv &&",
                     "Rscript tests/reference/long_gap_reference.R /tmp/long_gap_input.csv tests/reference/long_gap_reference.json"),
  n_calendar_days = n, time_df = time_df, gap = structure(c("2014-01-01", "2014-12-31"), array = TRUE),
  glm_epsilon = 1e-12, fits = fits
)
write_json(doc, args[[2]])
