# Reference values from base R for tests/test_copollutant_modifier_against_r.py.
#
# Invocation (from the repository root; writes the committed JSON):
#
#   Rscript tests/reference/copollutant_modifier.R airhealth/data tests/reference/copollutant_modifier.json
#
# Needs only base R and the splines package. Source: base R glm (R Core Team, R: A Language and Environment
# for Statistical Computing), splines::ns; the Wald test is computed by hand from coef() and vcov() with an
# explicit contrast matrix (no add-on package).
#
# What it does, independently of airhealth:
# 1. Reads the three Norhaven sample tables and merges them on the complete daily calendar (as
#    glm_reference.R does); builds lag k of a series as the value k rows (= days) earlier and the mean of
#    lags a..b as NA when any of its days is NA.
# 2. Two-pollutant models: y ~ x + z + ns(time, df = round(7 n / 365.25)) + ns(temperature, 6)
#    + ns(temp_mean_lag1_3, 6) + factor(dow), family = quasipoisson, with z the co-pollutant at the same lag
#    (the mean of lags 0-1, or the four columns of lags 0..3 for an unconstrained distributed lag).
# 3. Effect modification: y ~ season + (x0 + ... + xL):season + the same confounders, season "warm" in
#    April-September and "cold" otherwise (or a three-level period of years), so each level has its own
#    exposure coefficients; the cumulative effect of a level is the sum of its lag coefficients, with SE
#    sqrt(1' V 1); the Wald statistic of equal cumulative effects is (D b)' (D V_b D')^-1 (D b) with
#    D = [-1 1 0; -1 0 1] (levels - 1 rows), referred to chi-square on levels - 1 df.
# Numbers are written with 17 significant digits by the small JSON writer of common.R (base R only).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript copollutant_modifier.R DATA_DIR OUT_JSON")
data_dir <- args[[1]]
out_path <- args[[2]]
suppressPackageStartupMessages(library(splines))
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer

calendar <- read_sample_calendar(data_dir)
n <- nrow(calendar)

month <- as.integer(format(calendar$date, "%m"))
year <- as.integer(format(calendar$date, "%Y"))
calendar$season <- ifelse(month %in% 4:9, "warm", "cold")
calendar$period <- ifelse(year < 2015, "a_2010_2014", ifelse(year < 2020, "b_2015_2019", "c_2020_2023"))

# lag = c(a, b, dl): dl FALSE = the mean of lags a..b (one column), TRUE = one column per lag a..b
lag_columns <- function(x, lag, prefix) {
  if (!lag$dl) return(setNames(data.frame(lag_mean(x, lag$a, lag$b)), prefix))
  out <- data.frame(lag_cols(x, lag$a:lag$b))
  setNames(out, paste0(prefix, lag$a:lag$b))
}

run <- function(name, lag, copollutant = NULL, modifier = NULL, outcome = "deaths_all", exposure = "pm25") {
  d <- data.frame(y = calendar[[outcome]])
  xs <- lag_columns(calendar[[exposure]], lag, "x")
  d <- cbind(d, xs)
  zs <- NULL
  if (!is.null(copollutant)) {
    zs <- lag_columns(calendar[[copollutant]], lag, "z")
    d <- cbind(d, zs)
  }
  d$time <- seq_len(n)
  d$temperature <- calendar$temperature
  d$temp_mean_lag1_3 <- lag_mean(calendar$temperature, 1, 3)
  d$dow <- format(calendar$date, "%u")
  conf <- c(sprintf("ns(time, df = %d)", as.integer(round(7 * n / 365.25))), "ns(temperature, 6)",
            "ns(temp_mean_lag1_3, 6)", "factor(dow)")
  x_terms <- paste(names(xs), collapse = " + ")
  if (is.null(modifier)) {
    rhs <- c(x_terms, conf)
  } else {
    d$g <- factor(calendar[[modifier]])
    rhs <- c("g", sprintf("(%s):g", x_terms), conf)
  }
  if (!is.null(zs)) rhs <- c(rhs, names(zs))
  f <- as.formula(paste("y ~", paste(rhs, collapse = " + ")))
  fit <- glm(f, family = quasipoisson(), data = d, control = strict)
  b <- coef(fit)
  v <- vcov(fit)
  cumulative <- function(cols) {
    w <- rep(1, length(cols))
    list(coef = sum(b[cols]), se = sqrt(as.numeric(t(w) %*% v[cols, cols] %*% w)))
  }
  out <- list(name = name, outcome = outcome, exposure = exposure, copollutant = copollutant,
              modifier = modifier, lag_first = lag$a, lag_last = lag$b, distributed = lag$dl,
              formula = paste(deparse(f, width.cutoff = 500L), collapse = ""),
              dispersion = summary(fit)$dispersion, df_resid = df.residual(fit), n_used = length(fit$y),
              converged = fit$converged)
  if (is.null(modifier)) {
    out$exposure_effect <- cumulative(names(xs))
  } else {
    levels_g <- levels(d$g)
    cols_of <- function(g) paste0("g", g, ":", names(xs))  # R names the columns e.g. gwarm:x0
    out$levels <- levels_g
    out$group_effects <- lapply(levels_g, function(g) c(list(group = g), cumulative(cols_of(g))))
    # W: one row per level, ones on that level's lag columns; b_g = W b, V_g = W V W'
    all_cols <- unlist(lapply(levels_g, cols_of))
    W <- t(sapply(levels_g, function(g) as.numeric(all_cols %in% cols_of(g))))
    bg <- as.numeric(W %*% b[all_cols])
    Vg <- W %*% v[all_cols, all_cols] %*% t(W)
    G <- length(levels_g)
    D <- cbind(-1, diag(G - 1))
    stat <- as.numeric(t(D %*% bg) %*% solve(D %*% Vg %*% t(D)) %*% (D %*% bg))
    out$wald <- list(statistic = stat, df = G - 1, p_value = pchisq(stat, G - 1, lower.tail = FALSE))
  }
  if (!is.null(zs)) out$copollutant_effect <- cumulative(names(zs))
  out
}

lag01 <- list(a = 0, b = 1, dl = FALSE)
lag0 <- list(a = 0, b = 0, dl = FALSE)
dl03 <- list(a = 0, b = 3, dl = TRUE)
fits <- list(
  run("no2_lag01", lag01, copollutant = "no2"),
  run("o3_dl03", dl03, copollutant = "o3"),
  run("season_lag01", lag01, modifier = "season"),
  run("period_lag0", lag0, modifier = "period"),
  run("season_dl03_no2", dl03, copollutant = "no2", modifier = "season"),
  run("season_resp_lag01", lag01, modifier = "season", outcome = "admissions_respiratory")
)

for (i in seq_along(fits)) if (!is.null(fits[[i]]$levels)) fits[[i]]$levels <- structure(fits[[i]]$levels, array = TRUE)
doc <- list(
  source = "base R glm (R Core Team, R: A Language and Environment for Statistical Computing), splines::ns",
  r_version = R.version.string,
  invocation = "Rscript tests/reference/copollutant_modifier.R airhealth/data tests/reference/copollutant_modifier.json",
  n_calendar_days = n,
  glm_epsilon = 1e-12,
  fits = fits
)
write_json(doc, out_path)
