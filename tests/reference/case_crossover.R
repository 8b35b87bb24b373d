# Reference values from base R and survival for tests/test_case_crossover_against_r.py (the time-stratified
# case-crossover as a conditional Poisson model).
#
# Invocation (from the repository root; writes the committed JSON):
#
#   python tests/reference/make_case_crossover_input.py /tmp/case_crossover_input.csv
#   Rscript tests/reference/case_crossover.R /tmp/case_crossover_input.csv tests/reference/case_crossover.json
#
# Needs base R, the splines package and survival (clogit). Sources: base R glm (R Core Team, R: A Language
# and Environment for Statistical Computing), splines::ns, survival::clogit (Therneau).
#
# What it does, independently of airhealth:
# 1. Reads four years of the daily Norhaven table (one row per calendar day).
# 2. Strata: year x month x day of week (Janes, Sheppard & Lumley 2005), as text "YYYY-MM-u".
# 3. Temperature terms as the time-series model's: ns(temperature, 6) and ns(mean temperature over lags
#    1-3, 6), each basis built on the whole calendar (knots from every non-missing value) BEFORE rows are
#    left out; no time spline and no day-of-week term (the strata hold them).
# 4. Rows used: outcome, exposure columns and temperature terms present; then strata without events
#    and strata with a single usable day are left out (they carry no information on the exposure;
#    left in, zero-event strata would change the residual df and so the quasi-Poisson dispersion).
# 5. glm(y ~ exposure + temperature terms + factor(stratum)) with family quasipoisson and poisson, for
#    the exposure "0-1" (mean of lags 0 and 1, NA if either is missing) and for "dl0-5" (six explicit lag
#    columns; cumulative effect = sum, SE = sqrt(1'V1)); SEs from vcov() (summary.glm) and recomputed at
#    the final fitted means.
# 6. The conditional logistic case-crossover on the expanded case-referent data, for a small example:
#    2010 only, admissions_respiratory, pm25 at lag 0 and temperature entered linearly. For each day i
#    with y_i > 0 events, one matched set holds every usable day of i's stratum (day i is the case, the
#    other days its referents); the set is repeated y_i times (one set per event, the expanded rows).
#    clogit(case ~ pm25 + temperature + strata(set)). The same data as a Poisson glm with factor(stratum)
#    is fitted too; Armstrong, Gasparrini & Tobias (2014) show the two estimates are the same.
# Numbers are written with 17 significant digits by the small JSON writer of common.R (base R only).

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 2) stop("usage: Rscript case_crossover.R INPUT_CSV OUT_JSON")
suppressPackageStartupMessages({
  library(splines)
  library(survival)
})
here <- dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE)))
source(file.path(here, "common.R"))  # read_daily, lags, strict, pearson_dispersion, json writer

d0 <- read_daily(args[[1]])
n <- nrow(d0)
stratum <- paste(format(d0$date, "%Y"), format(d0$date, "%m"), format(d0$date, "%u"), sep = "-")

tb <- unclass(ns(d0$temperature, df = 6))[, 1:6]
tlb <- unclass(ns(rowMeans(lag_cols(d0$temperature, 1:3)), df = 6))[, 1:6]
colnames(tb) <- sprintf("t%d", 1:6)
colnames(tlb) <- sprintf("tl%d", 1:6)

# rows with every column present, then strata with events on at least two usable days
informative_rows <- function(y, X, s) {
  ok <- !is.na(y) & stats::complete.cases(X)
  events <- tapply(y[ok], s[ok], sum)
  days <- tapply(y[ok], s[ok], length)
  keep <- names(events)[events > 0 & days >= 2]
  list(rows = which(ok & s %in% keep), n_without_events = sum(events == 0),
       n_single_day = sum(events > 0 & days == 1), n_strata = length(keep))
}

fit_cc <- function(name, X, family) {
  y <- d0$deaths_all
  xnames <- colnames(X)
  all_x <- cbind(X, tb, tlb)
  use <- informative_rows(y, all_x, stratum)
  d <- data.frame(y = y, all_x, stratum = factor(stratum))[use$rows, ]
  d$stratum <- droplevels(d$stratum)
  f <- as.formula(paste("y ~", paste(c(xnames, colnames(tb), colnames(tlb)), collapse = " + "),
                        "+ factor(stratum)"))
  fam <- if (family == "quasipoisson") quasipoisson() else poisson()
  fit <- glm(f, family = fam, data = d, control = strict)
  V <- vcov(fit)[xnames, xnames, drop = FALSE]
  X_all <- model.matrix(fit)
  mu <- fitted(fit)
  phi <- if (family == "quasipoisson") pearson_dispersion(fit) else 1
  V_final <- cov_at_fitted(X_all, mu, phi)[xnames, xnames, drop = FALSE]
  w <- rep(1, length(xnames))
  list(
    name = name, family = family, n_params = length(xnames),
    formula = paste(deparse(f, width.cutoff = 500L), collapse = ""),
    lag_coef = unname(coef(fit)[xnames]), lag_se = unname(sqrt(diag(V))),
    lag_se_final_mu = unname(sqrt(diag(V_final))),
    cumulative_coef = sum(coef(fit)[xnames]),
    cumulative_se = sqrt(as.numeric(t(w) %*% V %*% w)),
    cumulative_se_final_mu = sqrt(as.numeric(t(w) %*% V_final %*% w)),
    dispersion = summary(fit)$dispersion, dispersion_final_mu = phi,
    deviance = deviance(fit), df_resid = df.residual(fit), n_used = length(fit$y),
    n_strata = use$n_strata, n_strata_without_events = use$n_without_events,
    n_strata_single_day = use$n_single_day, n_coef = length(coef(fit)), converged = fit$converged,
    aic = if (family == "poisson") AIC(fit) else NULL
  )
}

ma01 <- matrix(rowMeans(lag_cols(d0$pm25, 0:1)), ncol = 1, dimnames = list(NULL, "pm25_ma01"))
dl05 <- lag_cols(d0$pm25, 0:5)
colnames(dl05) <- sprintf("pm25_l%d", 0:5)
fits <- list(
  fit_cc("0-1", ma01, "quasipoisson"),
  fit_cc("0-1", ma01, "poisson"),
  fit_cc("dl0-5", dl05, "quasipoisson")
)

# ------------------------------------------------------------------ conditional logistic, small example
small <- format(d0$date, "%Y") == "2010"
ys <- d0$admissions_respiratory[small]
xs <- cbind(pm25 = d0$pm25[small], temperature = d0$temperature[small])
ss <- stratum[small]
use <- informative_rows(ys, xs, ss)
days <- use$rows
event_days <- days[ys[days] > 0]
sets <- lapply(seq_along(event_days), function(k) {
  i <- event_days[k]
  members <- days[ss[days] == ss[i]]
  data.frame(set = k, case = as.integer(members == i), pm25 = xs[members, "pm25"],
             temperature = xs[members, "temperature"])
})
one_each <- do.call(rbind, sets)
# one matched set per event: repeat set k y_k times, each copy its own set
copies <- lapply(seq_along(event_days), function(k) {
  block <- one_each[one_each$set == k, ]
  reps <- ys[event_days[k]]
  out <- block[rep(seq_len(nrow(block)), times = reps), ]
  out$set <- paste(k, rep(seq_len(reps), each = nrow(block)), sep = ".")
  out
})
expanded <- do.call(rbind, copies)
cl <- clogit(case ~ pm25 + temperature + strata(set), data = expanded,
             control = coxph.control(eps = 1e-12, toler.chol = 1e-13, iter.max = 100))
dsmall <- data.frame(y = ys, xs, stratum = factor(ss))[days, ]
dsmall$stratum <- droplevels(dsmall$stratum)
pg <- glm(y ~ pm25 + temperature + factor(stratum), family = poisson(), data = dsmall, control = strict)
clogit_doc <- list(
  first_day = "2010-01-01", last_day = "2010-12-31", outcome = "admissions_respiratory",
  n_sets = length(unique(expanded$set)), n_rows = nrow(expanded), n_strata = use$n_strata,
  coef = unname(coef(cl)), se = unname(sqrt(diag(vcov(cl)))),
  glm_coef = unname(coef(pg)[c("pm25", "temperature")]),
  glm_se = unname(sqrt(diag(vcov(pg)))[c("pm25", "temperature")]),
  loglik = as.numeric(cl$loglik[2])
)

for (i in seq_along(fits)) {
  for (key in c("lag_coef", "lag_se", "lag_se_final_mu")) fits[[i]][[key]] <- as_array(fits[[i]][[key]])
}
for (key in c("coef", "se", "glm_coef", "glm_se")) clogit_doc[[key]] <- as_array(clogit_doc[[key]])
doc <- list(
  source = paste("base R glm (R Core Team, R: A Language and Environment for Statistical Computing),",
                 "splines::ns, survival::clogit (Therneau)"),
  r_version = R.version.string,
  survival_version = as.character(packageVersion("survival")),
  invocation = paste("python tests/reference/make_case_crossover_input.py /tmp/case_crossover_input.csv &&",
                     "Rscript tests/reference/case_crossover.R /tmp/case_crossover_input.csv",
                     "tests/reference/case_crossover.json"),
  n_calendar_days = n,
  fits = fits,
  clogit = clogit_doc
)
write_json(doc, args[[2]], drop_null = TRUE)
