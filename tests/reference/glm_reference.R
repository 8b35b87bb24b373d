# Reference values from base R for tests/test_against_r.py and tests/test_splines.py.
#
# Invocation (from the repository root; writes the committed JSON):
#
#   Rscript tests/reference/glm_reference.R airhealth/data tests/reference/glm_reference.json
#
# Needs only base R, the splines package and (for the negative binomial variant, skipped when absent) the
# recommended package MASS. Source: base R glm (R Core Team, R: A Language and Environment for
# Statistical Computing), splines::ns, MASS::glm.nb (Venables & Ripley 2002, Modern Applied Statistics
# with S, 4th ed.).
#
# What it does, independently of airhealth:
# 1. Reads the three Norhaven sample tables (counts, pollution, weather) and merges them in R on the
#    complete daily calendar from the first to the last date (days absent from a table get NA).
# 2. Builds lagged and moving-average columns in R: lag k is the value k rows (= days) earlier; a moving
#    average of lags a..b is NA when any of its days is NA (rowMeans without na.rm).
# 3. Fits glm(y ~ x + ns(time, df = round(7 * n / 365.25)) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6)
#    + factor(dow), family = quasipoisson) and variants. ns() is evaluated inside the formula, so
#    model.frame() computes it on the full calendar (knots from all non-missing values) before na.omit
#    drops incomplete rows -- the behaviour airhealth reproduces.
# 4. Evaluates splines::ns bases for a few fixed x vectors (with and without intercept, given knots, and
#    predict() beyond the boundary knots).
# Numbers are written with 17 significant digits by the small JSON writer of common.R (base R only).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript glm_reference.R DATA_DIR OUT_JSON")
data_dir <- args[[1]]
out_path <- args[[2]]
suppressPackageStartupMessages(library(splines))
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer
has_mass <- suppressPackageStartupMessages(requireNamespace("MASS", quietly = TRUE))

# ---------------------------------------------------------------------------------------------- data
calendar <- read_sample_calendar(data_dir)
n <- nrow(calendar)

# ------------------------------------------------------------------------------------------ variants
variant <- function(name, outcome = "deaths_all", exposure = "pm25", lag = c(0, 1), temperature = TRUE,
                    humidity = FALSE, season = "spline", family = "quasipoisson") {
  list(name = name, outcome = outcome, exposure = exposure, lag = lag, temperature = temperature,
       humidity = humidity, season = season, family = family)
}
variants <- list(
  variant("main"),
  variant("lag0", lag = c(0, 0)),
  variant("lag2", lag = c(2, 2)),
  variant("lag0_3", lag = c(0, 3)),
  variant("no_temperature", temperature = FALSE),
  variant("humidity_3df", humidity = TRUE),
  variant("fourier_4", season = "fourier"),
  variant("poisson", family = "poisson"),
  variant("negbin", family = "negbin"),
  variant("respiratory_no2_lag0", outcome = "admissions_respiratory", exposure = "no2", lag = c(0, 0)),
  variant("cardiovascular_pm10_lag01", outcome = "admissions_cardiovascular", exposure = "pm10")
)

model_data <- function(v) {
  d <- data.frame(y = calendar[[v$outcome]])
  d$x <- lag_mean(calendar[[v$exposure]], v$lag[1], v$lag[2])
  d$time <- seq_len(n)
  d$temperature <- calendar$temperature
  d$temp_mean_lag1_3 <- lag_mean(calendar$temperature, 1, 3)
  d$humidity <- calendar$humidity
  d$dow <- format(calendar$date, "%u")  # 1 = Monday .. 7 = Sunday
  t <- as.numeric(calendar$date - calendar$date[1])
  for (k in 1:4) {
    d[[paste0("sin", k)]] <- sin(2 * pi * k * t / 365.25)
    d[[paste0("cos", k)]] <- cos(2 * pi * k * t / 365.25)
  }
  d$trend <- t / 365.25
  d
}

model_formula <- function(v) {
  rhs <- "x"
  if (v$season == "spline") {
    rhs <- c(rhs, sprintf("ns(time, df = %d)", as.integer(round(7 * n / 365.25))))
  } else {
    rhs <- c(rhs, paste0(c("sin", "cos"), rep(1:4, each = 2)), "trend")
  }
  if (v$temperature) rhs <- c(rhs, "ns(temperature, 6)", "ns(temp_mean_lag1_3, 6)")
  if (v$humidity) rhs <- c(rhs, "ns(humidity, 3)")
  rhs <- c(rhs, "factor(dow)")
  as.formula(paste("y ~", paste(rhs, collapse = " + ")))
}

# Strict convergence (`strict` of common.R: epsilon 1e-12 instead of the default 1e-8), so the reference
# is the exact optimum to far more digits than the 1e-6 relative tolerance of the tests.

fit_variant <- function(v) {
  d <- model_data(v)
  f <- model_formula(v)
  theta <- NULL
  if (v$family == "negbin") {
    fit <- MASS::glm.nb(f, data = d, control = glm.control(epsilon = 1e-10, maxit = 100))
    # glm.nb's theta.ml stops at |step| < eps^0.25; refine theta to 1e-12 and refit with theta fixed.
    theta <- fit$theta
    for (i in 1:50) {
      new_theta <- MASS::theta.ml(fit$y, fitted(fit), limit = 100, eps = 1e-12)
      fit <- glm(f, family = MASS::negative.binomial(new_theta), data = d, control = strict,
                 start = coef(fit))
      done <- abs(new_theta - theta) <= 1e-11 * theta
      theta <- as.numeric(new_theta)
      if (done) break
    }
    s <- summary(fit, dispersion = 1)
  } else {
    fam <- if (v$family == "poisson") poisson() else quasipoisson()
    fit <- glm(f, family = fam, data = d, control = strict)
    s <- summary(fit)
  }
  p <- length(coef(fit))
  y <- fit$y
  mu <- fitted(fit)
  # summary.glm uses the IRLS weights from the start of the last iteration; recompute the Pearson
  # dispersion and the covariance at the final fitted means as well (they agree to ~1e-8 relative).
  X <- model.matrix(fit)
  variance <- if (v$family == "negbin") mu + mu^2 / theta else mu
  pearson <- sum((y - mu)^2 / variance) / df.residual(fit)
  phi_final <- if (v$family == "quasipoisson") pearson else 1
  cov_final <- solve(crossprod(X * sqrt(mu^2 / variance))) * phi_final
  out <- list(
    name = v$name, outcome = v$outcome, exposure = v$exposure,
    lag = if (v$lag[1] == v$lag[2]) sprintf("%d", v$lag[1]) else sprintf("%d-%d", v$lag[1], v$lag[2]),
    temperature = v$temperature, humidity = v$humidity, season = v$season, family = v$family,
    formula = paste(deparse(f, width.cutoff = 500L), collapse = ""),
    coef = unname(coef(fit)["x"]), se = unname(s$coefficients["x", 2]),
    dispersion = if (v$family == "quasipoisson") s$dispersion else 1,
    se_final_mu = sqrt(cov_final["x", "x"]), dispersion_final_mu = phi_final,
    deviance = deviance(fit), df_resid = df.residual(fit), n_used = length(y), n_coef = p,
    converged = fit$converged
  )
  if (v$family == "quasipoisson") {
    # QAIC = -2 log L(Poisson) / dispersion + 2 p (Peng, Dominici & Louis 2006, J R Stat Soc A).
    out$qaic <- -2 * sum(dpois(y, mu, log = TRUE)) / phi_final + 2 * p
  } else if (v$family == "poisson") {
    out$aic <- AIC(fit)
  } else {
    out$aic <- AIC(fit) + 2  # glm with negative.binomial(theta) does not count theta as a parameter
    out$theta <- theta
  }
  out
}

fits <- list()
for (v in variants) {
  if (v$family == "negbin" && !has_mass) {
    message("MASS is not installed: skipping the negative binomial variant")
    next
  }
  fits[[length(fits) + 1]] <- fit_variant(v)
}

# --------------------------------------------------------------------------------- ns() basis values
x_small <- c(0.3, 1.1, 2.5, 2.6, 4.0, 5.5, 7.0, 8.2, 9.9, 12.0)
x_wave <- round(10 + 8 * sin(seq_len(200) / 7) + seq_len(200) / 50, 1)  # repeated values, as temperatures
x_new <- c(-2.0, 0.3, 3.3, 6.75, 12.0, 15.5)
basis_case <- function(name, x, df = NULL, knots = NULL, intercept = FALSE, newx = NULL) {
  b <- if (is.null(knots)) ns(x, df = df, intercept = intercept) else ns(x, knots = knots, intercept = intercept)
  case <- list(name = name, x = x, df = df, intercept = intercept,
               interior_knots = as.numeric(attr(b, "knots")), boundary_knots = as.numeric(attr(b, "Boundary.knots")),
               basis = unclass(b)[, , drop = FALSE])
  attributes(case$basis) <- list(dim = dim(b))
  if (!is.null(newx)) {
    case$newx <- newx
    pb <- predict(b, newx)
    case$new_basis <- matrix(as.numeric(pb), nrow = nrow(pb))
  }
  case
}
bases <- list(
  basis_case("small_df3", x_small, df = 3, newx = x_new),
  basis_case("small_df5", x_small, df = 5, newx = x_new),
  basis_case("small_df1", x_small, df = 1, newx = x_new),
  basis_case("small_df4_intercept", x_small, df = 4, intercept = TRUE, newx = x_new),
  basis_case("small_knots", x_small, knots = c(2, 5, 6), newx = x_new),
  basis_case("wave_df6", x_wave, df = 6, newx = c(-5, 1.1, 10, 19.3, 30)),
  basis_case("wave_df6_intercept", x_wave, df = 6, intercept = TRUE),
  basis_case("time_df12", as.numeric(seq_len(730)), df = 12)
)

# ------------------------------------------------------------------------------------------ JSON out
for (i in seq_along(bases)) {
  for (k in c("x", "newx", "interior_knots", "boundary_knots")) {
    if (!is.null(bases[[i]][[k]])) bases[[i]][[k]] <- as_array(bases[[i]][[k]])
  }
}
doc <- list(
  source = "base R glm (R Core Team, R: A Language and Environment for Statistical Computing), splines::ns, MASS::glm.nb",
  r_version = R.version.string,
  invocation = "Rscript tests/reference/glm_reference.R airhealth/data tests/reference/glm_reference.json",
  n_calendar_days = n,
  time_df = as.integer(round(7 * n / 365.25)),
  glm_epsilon = 1e-12,
  fits = fits,
  ns_bases = bases
)
write_json(doc, out_path)
