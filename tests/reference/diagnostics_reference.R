# Reference values from base R and the sandwich package for tests/test_residual_diagnostics.py and
# tests/test_hac_intervals.py.
#
# Invocation (from the repository root; writes the committed JSON):
#
#   python tests/reference/make_diagnostics_input.py /tmp/diagnostics_input.csv
#   Rscript tests/reference/diagnostics_reference.R /tmp/diagnostics_input.csv tests/reference/diagnostics_reference.json
#
# Sources: base R glm, residuals.glm, hatvalues, cooks.distance (influence.measures), acf, pacf (R Core Team,
# R: A Language and Environment for Statistical Computing); splines::ns; sandwich::NeweyWest (Zeileis 2004,
# J Stat Softw 11(10); Newey & West 1987, Econometrica 55:703-708).
#
# What it does, independently of airhealth: reads the complete daily table (no missing value), builds the
# mean of temperature at lags 1-3 in R (NA for the first 3 days), and fits
#   glm(y ~ pm25 + ns(time, df = round(7 n / 365.25)) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6)
#       + factor(dow), family = quasipoisson)
# on the 1093 consecutive days with every value. It writes the residuals (deviance, pearson, response), the
# hat values, Cook's distances, standardized deviance residuals (rstandard), the autocorrelations of the
# deviance residuals (acf/pacf to lag 30) and
# Newey-West standard errors of every coefficient (Bartlett kernel, prewhite = FALSE) for a few lags, with
# and without the n / (n - k) adjustment. Numbers are written with 17 significant digits.

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript diagnostics_reference.R INPUT_CSV OUT_JSON")
suppressPackageStartupMessages(library(splines))
suppressPackageStartupMessages(library(sandwich))
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer

d <- read_daily(args[[1]])
n <- nrow(d)
# the mean written out, as when the frozen JSON was made (lag_mean's rowMeans rounds differently, ~1e-16)
d$temp_mean_lag1_3 <- (lag_k(d$temperature, 1) + lag_k(d$temperature, 2) + lag_k(d$temperature, 3)) / 3
d$time <- seq_len(n)
d$dow <- format(d$date, "%u")
time_df <- as.integer(round(7 * n / 365.25))
f <- as.formula(sprintf(
  "deaths_all ~ pm25 + ns(time, df = %d) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow)", time_df))
fit <- glm(f, family = quasipoisson(), data = d, control = strict)
used <- d$date[as.integer(names(fitted(fit)))]

dev_res <- residuals(fit, type = "deviance")
hac <- function(lag, adjust) sqrt(diag(NeweyWest(fit, lag = lag, prewhite = FALSE, adjust = adjust)))
nw <- list()
for (lag in c(0, 5, 7, 20)) {
  nw[[length(nw) + 1]] <- list(lag = lag, adjust = FALSE, se = unname(hac(lag, FALSE)))
}
nw[[length(nw) + 1]] <- list(lag = 7, adjust = TRUE, se = unname(hac(7, TRUE)))

arr <- function(v) structure(unname(as.numeric(v)), array = TRUE)
doc <- list(
  source = "base R glm, residuals.glm, hatvalues, cooks.distance, acf, pacf; splines::ns; sandwich::NeweyWest",
  r_version = R.version.string,
  sandwich_version = as.character(packageVersion("sandwich")),
  invocation = paste("Rscript tests/reference/diagnostics_reference.R /tmp/diagnostics_input.csv",
                     "tests/reference/diagnostics_reference.json"),
  n_calendar_days = n, time_df = time_df, n_used = length(fitted(fit)),
  first_day = format(min(used)), last_day = format(max(used)),
  coef = unname(coef(fit)["pm25"]), se = unname(summary(fit)$coefficients["pm25", 2]),
  dispersion = summary(fit)$dispersion, rank = fit$rank,
  deviance_residuals = arr(dev_res),
  pearson_residuals = arr(residuals(fit, type = "pearson")),
  response_residuals = arr(residuals(fit, type = "response")),
  hat_values = arr(hatvalues(fit)),
  cooks_distance = arr(cooks.distance(fit)),
  standardized_residuals = arr(rstandard(fit)),
  acf = arr(acf(dev_res, lag.max = 30, plot = FALSE)$acf[-1]),
  pacf = arr(pacf(dev_res, lag.max = 30, plot = FALSE)$acf),
  exposure_index = which(names(coef(fit)) == "pm25"),
  newey_west = nw
)
write_json(doc, args[[2]])
