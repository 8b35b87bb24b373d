# Reference values from base R for tests/test_residual_lags.py: a transitional model (lagged deviance residuals
# as covariates; Brumback et al. 2000, J Am Stat Assoc 95:16-27) fitted with glm.
#
# Invocation (from the repository root; writes the committed JSON):
#
#   python tests/reference/make_diagnostics_input.py /tmp/diagnostics_input.csv
#   Rscript tests/reference/residual_lags_reference.R /tmp/diagnostics_input.csv tests/reference/residual_lags_reference.json
#
# Sources: base R glm, residuals.glm (R Core Team, R: A Language and Environment for Statistical Computing);
# splines::ns.
#
# What it does, independently of airhealth: reads the complete daily table of make_diagnostics_input.py, makes
# pm25 missing on rows 300-302 and 700 (gaps), builds the mean of temperature at lags 1-3 in R, and fits
#   glm(deaths_all ~ ns(time, df = round(7 n / 365.25)) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6)
#       + factor(dow) + pm25, family = quasipoisson)
# Its deviance residuals are placed on the calendar (NA on days not used); r1, r2 are those residuals 1 and 2
# calendar days earlier, and the model is fitted again with + r1 + r2 (glm leaves out the days where any is
# NA). Writes the second fit's pm25 and residual-lag coefficients, standard errors, dispersion, deviance and
# days used, with 17 significant digits.

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript residual_lags_reference.R INPUT_CSV OUT_JSON")
suppressPackageStartupMessages(library(splines))

d <- read.csv(args[[1]], stringsAsFactors = FALSE)
d$date <- as.Date(d$date)
n <- nrow(d)
d$pm25[c(300, 301, 302, 700)] <- NA
lag_k <- function(x, k) c(rep(NA_real_, k), head(x, length(x) - k))
d$temp_mean_lag1_3 <- (lag_k(d$temperature, 1) + lag_k(d$temperature, 2) + lag_k(d$temperature, 3)) / 3
d$time <- seq_len(n)
d$dow <- format(d$date, "%u")
time_df <- as.integer(round(7 * n / 365.25))
base <- sprintf("deaths_all ~ ns(time, df = %d) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow)",
                time_df)
ctl <- glm.control(epsilon = 1e-12, maxit = 100)
first <- glm(as.formula(paste(base, "+ pm25")), family = quasipoisson(), data = d, control = ctl)
on_calendar <- rep(NA_real_, n)
on_calendar[as.integer(names(fitted(first)))] <- residuals(first, type = "deviance")
d$r1 <- lag_k(on_calendar, 1)
d$r2 <- lag_k(on_calendar, 2)
second <- glm(as.formula(paste(base, "+ r1 + r2 + pm25")), family = quasipoisson(), data = d, control = ctl)
s <- summary(second)$coefficients
used <- d$date[as.integer(names(fitted(second)))]

num <- function(z) sprintf("%.17g", z)
cat(file = args[[2]], paste0(
  "{\n",
  '  "source": "base R glm, residuals.glm; splines::ns",\n',
  '  "r_version": "', R.version.string, '",\n',
  '  "invocation": "Rscript tests/reference/residual_lags_reference.R /tmp/diagnostics_input.csv ',
  'tests/reference/residual_lags_reference.json",\n',
  '  "n_used_first": ', length(fitted(first)), ",\n",
  '  "n_used": ', length(fitted(second)), ",\n",
  '  "first_day": "', format(min(used)), '",\n',
  '  "coef": {"pm25": ', num(s["pm25", 1]), ', "r1": ', num(s["r1", 1]), ', "r2": ', num(s["r2", 1]), "},\n",
  '  "se": {"pm25": ', num(s["pm25", 2]), ', "r1": ', num(s["r1", 2]), ', "r2": ', num(s["r2", 2]), "},\n",
  '  "dispersion": ', num(summary(second)$dispersion), ",\n",
  '  "deviance": ', num(deviance(second)), "\n",
  "}\n"))
