# Reference values from R metafor for tests/test_pooling_against_r.py (second-stage pooling of city estimates).
#
# Invocation (from the repository root; writes the committed JSON):
#
#   Rscript tests/reference/pooling_reference.R tests/reference/pooling_reference.json
#
# Needs R with the metafor package (Viechtbauer W, 2010, Conducting meta-analyses in R with the metafor
# package, J Stat Softw 36(3)) and MASS (for mvrnorm); on Debian r-cran-metafor. Written with metafor 3.8-1.
#
# What it does, independently of airhealth:
# 1. Data sets (their inputs are written to the JSON, so Python pools exactly the same numbers):
#    - "bcg": metafor's dat.bcg (Colditz et al. 1994, JAMA 271:698-702, BCG vaccine trials), log relative
#      risks and sampling variances from escalc(measure = "RR"), moderators ablat (absolute latitude) and year;
#    - "invented": 15 invented city estimates (log RR per unit, set.seed below) with a known between-city
#      variance and one invented city-level moderator;
#    - "homogeneous": 8 invented estimates with no between-city variation (REML and DL tau2 at 0).
# 2. For each data set and method ("REML", "DL", "FE"): rma() without and with moderators; estimate, SE, tau2
#    (and se.tau2), QE and its p-value, I2, H2, QM and its p-value, predict() (prediction interval with
#    metafor's default normal quantile; with moderators at all moderators = 0, and at a few other values) and
#    blup().
#    REML runs with a tight convergence threshold (1e-12) so that both programs report the optimum rather
#    than the point where their iterations stopped.
# 3. Multivariate: rma.mv(yi, V, mods = ~ outcome - 1, random = ~ outcome | city, struct = "UN",
#    method = "REML") on
#    - "berkey": metafor's dat.berkey1998 (Berkey et al. 1998, Stat Med 17:2537-2550; 5 trials, 2 outcomes,
#      within-trial covariances given);
#    - "invented3": 40 invented cities with 3 coefficients each (e.g. three lags), random positive definite
#      within-city covariances and a known between-city covariance (set.seed below).
#    Written: the pooled coefficients, their covariance (vcov), the between-city covariance (tau2 on the
#    diagonal, rho for the correlations), QE and its df and p-value.
# Numbers are written with 17 significant digits by a small JSON writer in base R (no extra packages).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 1) stop("usage: Rscript pooling_reference.R OUTPUT.json")
suppressPackageStartupMessages({
  library(metafor)
  library(MASS)
})
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer
tight <- list(threshold = 1e-12, maxiter = 10000, stepadj = 1)

# ------------------------------------------------------------------------------------------ data sets
bcg <- escalc(measure = "RR", ai = tpos, bi = tneg, ci = cpos, di = cneg, data = dat.bcg)
bcg_data <- list(city = sprintf("%d %s", bcg$trial, bcg$author),  # two trials share an author name
                 yi = as.numeric(bcg$yi), vi = as.numeric(bcg$vi),
                 ablat = as.numeric(bcg$ablat), year = as.numeric(bcg$year),
                 tpos = bcg$tpos, tneg = bcg$tneg, cpos = bcg$cpos, cneg = bcg$cneg)

set.seed(20261202)
k <- 15
vi <- runif(k, 0.2e-7, 3e-7)                  # within-city variances of log RR per unit
temp <- round(runif(k, 5, 25), 1)             # an invented city-level moderator (mean temperature)
yi <- 0.0006 + 0.00003 * (temp - 15) + rnorm(k, 0, sqrt(2e-7)) + rnorm(k, 0, sqrt(vi))
invented <- list(city = sprintf("city%02d", 1:k), yi = yi, vi = vi, temp = temp)

k <- 8
vi <- runif(k, 1e-7, 4e-7)
homogeneous <- list(city = sprintf("town%d", 1:k), yi = 0.0005 + rnorm(k, 0, sqrt(vi) * 0.3), vi = vi,
                    temp = round(runif(k, 5, 25), 1))

# ------------------------------------------------------------------------------------------ univariate
describe <- function(res, newmods) {
  pr <- if (is.null(newmods)) predict(res) else predict(res, newmods = newmods)
  bl <- if (res$method == "FE") NULL else blup(res)
  list(
    coef = as.numeric(res$beta), se = as.numeric(res$se), tau2 = res$tau2,
    se_tau2 = if (res$method == "REML") res$se.tau2 else NULL,
    q = res$QE, q_p = res$QEp, i2 = res$I2, h2 = res$H2, k = res$k,
    qm = if (length(res$beta) > 1) res$QM else NULL, qm_p = if (length(res$beta) > 1) res$QMp else NULL,
    qm_df = if (length(res$beta) > 1) res$QMdf[1] else NULL,
    ci_low = as.numeric(res$ci.lb)[1], ci_high = as.numeric(res$ci.ub)[1],
    # FE: predict() gives no prediction interval; with tau2 = 0 it is the confidence interval.
    pi_low = if (is.null(pr$pi.lb)) pr$ci.lb else pr$pi.lb, pi_high = if (is.null(pr$pi.ub)) pr$ci.ub else pr$pi.ub,
    blup = if (is.null(bl)) NULL else list(pred = bl$pred, se = bl$se, low = bl$pi.lb, high = bl$pi.ub)
  )
}
# predict() at a few moderator values (rows of `at`): pooled effect with confidence and prediction intervals.
predictions <- function(res, at) {
  pr <- predict(res, newmods = at)
  pi_lb <- if (is.null(pr$pi.lb)) pr$ci.lb else pr$pi.lb
  pi_ub <- if (is.null(pr$pi.ub)) pr$ci.ub else pr$pi.ub
  list(at = lapply(seq_len(nrow(at)), function(i) unname(at[i, ])), pred = pr$pred, se = pr$se,
       ci_low = pr$ci.lb, ci_high = pr$ci.ub, pi_low = pi_lb, pi_high = pi_ub)
}
univariate <- function(d, mods, at = NULL) {
  out <- list()
  for (method in c("REML", "DL", "FE")) {
    res <- rma(yi = d$yi, vi = d$vi, method = method, control = tight)
    out[[paste0(method, "_plain")]] <- c(list(method = method, moderators = character(0)), describe(res, NULL))
    if (length(mods)) {
      X <- as.matrix(as.data.frame(d[mods]))
      res <- rma(yi = d$yi, vi = d$vi, mods = X, method = method, control = tight)
      out[[paste0(method, "_mods")]] <- c(list(method = method, moderators = mods),
                                          describe(res, rep(0, length(mods))),
                                          list(predictions = predictions(res, at)))
    }
  }
  out
}
uni <- list(
  bcg = list(data = bcg_data, fits = univariate(bcg_data, c("ablat", "year"),
                                                 at = cbind(ablat = c(10, 30, 50), year = c(1950, 1970, 1970)))),
  invented = list(data = invented, fits = univariate(invented, "temp", at = cbind(temp = c(8, 15, 22)))),
  homogeneous = list(data = homogeneous, fits = univariate(homogeneous, "temp", at = cbind(temp = c(10, 20))))
)

# ------------------------------------------------------------------------------------------ multivariate
# rma.mv's optimiser works on the raw variance scale; with variances of 1e-7 (log RR per unit) it stops far
# from the optimum (seen: a REML log-likelihood 4.8 below it). The REML fit is equivariant under rescaling,
# so the data are fitted multiplied by `scale` and the results scaled back.
multivariate <- function(Y, S, scale = 1) {
  k <- nrow(Y); p <- ncol(Y)
  long <- data.frame(city = factor(rep(seq_len(k), each = p)), outcome = factor(rep(seq_len(p), k)),
                     yi = as.vector(t(Y)) * scale)
  V <- bldiag(S) * scale^2
  res <- rma.mv(yi, V, mods = ~ outcome - 1, random = ~ outcome | city, struct = "UN", method = "REML",
                data = long, control = list(optimizer = "optim", optmethod = "BFGS", reltol = 1e-12, maxit = 10000))
  between <- res$G
  vb <- vcov(res) / scale^2
  between <- between / scale^2
  list(coef = as.numeric(res$beta) / scale, cov = lapply(seq_len(p), function(j) unname(vb[j, ])),
       between_cov = lapply(seq_len(p), function(j) unname(between[j, ])),
       q = res$QE, q_df = k * p - p, q_p = res$QEp, scale = scale,
       logLik_scaled = as.numeric(logLik(res)))
}
rows <- function(M) lapply(seq_len(nrow(M)), function(i) unname(M[i, ]))

berkey <- dat.berkey1998
Yb <- cbind(berkey$yi[berkey$outcome == "PD"], berkey$yi[berkey$outcome == "AL"])
Sb <- lapply(split(berkey, berkey$trial), function(d) as.matrix(d[, c("v1i", "v2i")]))

set.seed(20261203)
k <- 40; p <- 3
true_between <- matrix(c(4, 2, 1, 2, 3, 1.5, 1, 1.5, 2), 3) * 5e-7
true_mean <- c(0.0006, 0.0003, 0.0001)
S3 <- lapply(seq_len(k), function(i) {
  A <- matrix(rnorm(p * p), p)
  (crossprod(A) + diag(p)) * runif(1, 0.5e-7, 2e-7)
})
Y3 <- t(sapply(seq_len(k), function(i) true_mean + mvrnorm(1, rep(0, p), true_between) +
                 mvrnorm(1, rep(0, p), S3[[i]])))

mv <- list(
  berkey = list(coefs = rows(Yb), covs = lapply(Sb, function(M) rows(unname(M))), fit = multivariate(Yb, Sb, scale = 10)),
  invented3 = list(coefs = rows(Y3), covs = lapply(S3, rows), fit = multivariate(Y3, S3, scale = 1000))
)
names(mv$berkey$covs) <- NULL

# ------------------------------------------------------------------------------------------ JSON out
# Every data vector, coefficient vector, matrix row and moderator list is written as a JSON array, even of length 1.
arrays <- function(x) {
  if (is.list(x)) {
    out <- lapply(x, arrays)
    attributes(out) <- attributes(x)
    return(out)
  }
  if (is.numeric(x) || is.character(x)) return(structure(as.vector(x), array = TRUE))
  x
}
scalars <- c("tau2", "se_tau2", "q", "q_p", "i2", "h2", "k", "qm", "qm_p", "qm_df", "ci_low", "ci_high",
             "pi_low", "pi_high", "q_df", "logLik_scaled", "scale", "method")
unarray <- function(x) {
  if (!is.list(x)) return(x)
  for (n in intersect(names(x), scalars)) attr(x[[n]], "array") <- NULL
  for (i in seq_along(x)) if (is.list(x[[i]])) x[[i]] <- unarray(x[[i]])
  x
}
doc <- list(
  source = paste0("R metafor ", as.character(packageVersion("metafor")),
                  " (Viechtbauer 2010, J Stat Softw 36(3)): rma, predict, blup, rma.mv struct UN"),
  r_version = R.version.string,
  invocation = "Rscript tests/reference/pooling_reference.R tests/reference/pooling_reference.json",
  univariate = unarray(arrays(uni)),
  multivariate = unarray(arrays(mv))
)
write_json(doc, args[1], drop_null = TRUE)
