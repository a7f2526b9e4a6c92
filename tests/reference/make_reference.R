# Reference values for tallyd's GLM fits, computed by R's glm and MASS's
# glm.nb (Debian packages r-base-core and r-cran-mass).
#
# Usage: Rscript --vanilla make_reference.R OUTDIR
#
# For each case NAME it writes, into OUTDIR (created if missing):
#   NAME_data.csv     header "y,offset,weight,<model.matrix column names>",
#                     one row per record: exactly the design R fitted;
#   NAME_coef.csv     header "term,estimate,std_error", one row per column;
#                     NA where R found the column aliased;
#   NAME_summary.csv  header "key,value": deviance, null_deviance, aic,
#                     dispersion, df_residual, rank, log_likelihood, and for
#                     negative binomial fits theta and theta_se.
# Numbers carry 17 significant digits so that they read back exactly. NA
# marks a value R leaves undefined (e.g. the quasi-Poisson AIC).

suppressPackageStartupMessages(library(MASS))

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 1) stop("usage: Rscript --vanilla make_reference.R OUTDIR")
outdir <- args[[1]]
dir.create(outdir, recursive = TRUE, showWarnings = FALSE)

# Far tighter than R's default (epsilon 1e-8, maxit 25), so that the
# reference is the MLE to ~1e-10 and not an early stop.
tight <- glm.control(epsilon = 1e-12, maxit = 100)

num <- function(x) ifelse(is.na(x), "NA", trimws(formatC(as.numeric(x), digits = 17, format = "g")))

write_lines <- function(name, suffix, lines) {
  writeLines(lines, file.path(outdir, paste0(name, "_", suffix, ".csv")))
}

# Design, response, offset and prior weights exactly as the fit saw them.
write_data <- function(name, fit) {
  X <- model.matrix(fit)
  stopifnot(!any(grepl(",", colnames(X))))
  n <- nrow(X)
  offset <- if (is.null(fit$offset)) rep(0, n) else fit$offset
  weight <- if (is.null(fit$prior.weights)) rep(1, n) else fit$prior.weights
  rows <- cbind(fit$y, offset, weight, X)
  write_lines(name, "data", c(paste(c("y", "offset", "weight", colnames(X)), collapse = ","),
                              apply(rows, 1, function(r) paste(num(r), collapse = ","))))
}

# Estimates and standard errors for every column, NA where aliased.
write_coef <- function(name, fit) {
  est <- coef(fit)
  se <- setNames(rep(NA_real_, length(est)), names(est))
  cf <- summary(fit)$coefficients
  se[rownames(cf)] <- cf[, "Std. Error"]
  write_lines(name, "coef", c("term,estimate,std_error",
                              paste(names(est), num(est), num(se), sep = ",")))
}

write_summary <- function(name, values) {
  write_lines(name, "summary", c("key,value", paste(names(values), num(unlist(values)), sep = ",")))
}

export_glm <- function(name, fit) {
  stopifnot(fit$converged)
  write_data(name, fit)
  write_coef(name, fit)
  quasi <- fit$family$family == "quasipoisson"
  write_summary(name, list(
    deviance = fit$deviance, null_deviance = fit$null.deviance,
    aic = if (quasi) NA else fit$aic,  # R's quasi families have no AIC
    dispersion = summary(fit)$dispersion, df_residual = fit$df.residual, rank = fit$rank,
    log_likelihood = if (quasi) NA else as.numeric(logLik(fit))))
}

export_glm_nb <- function(name, fit) {
  stopifnot(fit$converged)
  write_data(name, fit)
  write_coef(name, fit)
  write_summary(name, list(
    deviance = fit$deviance, null_deviance = fit$null.deviance, aic = fit$aic,
    dispersion = 1, df_residual = fit$df.residual, rank = fit$rank,
    log_likelihood = fit$twologlik / 2, theta = fit$theta, theta_se = fit$SE.theta))
}

# (a) Ship damage incidents, McCullagh and Nelder (1989, section 6.3.2), as
# shipped in MASS::ships: Poisson, log link, offset log(aggregate months of
# service); ships with no service are left out, as they are in the book.
ships1 <- subset(ships, service > 0)
ships_formula <- incidents ~ type + factor(year) + factor(period) + offset(log(service))
export_glm("ships_poisson", glm(ships_formula, family = poisson, data = ships1, control = tight))

# (b) The same with a quasi-Poisson dispersion (Pearson chi^2 / df).
export_glm("ships_quasipoisson",
           glm(ships_formula, family = quasipoisson, data = ships1, control = tight))

# (c) Car insurance claims, MASS::Insurance: Poisson with offset log(Holders).
# Group and Age are ordered factors, so model.matrix uses polynomial
# contrasts (.L, .Q, .C); the exported design is exactly that matrix.
insurance_formula <- Claims ~ District + Group + Age + offset(log(Holders))
export_glm("insurance_poisson",
           glm(insurance_formula, family = poisson, data = Insurance, control = tight))

# (d) Dobson (1990, p. 93) randomized controlled trial, as in R's ?glm
# example, with the log, sqrt and identity links.
dobson <- data.frame(counts = c(18, 17, 15, 20, 10, 20, 25, 13, 12),
                     outcome = gl(3, 1, 9), treatment = gl(3, 3))
for (link in c("log", "sqrt", "identity")) {
  export_glm(paste0("dobson_", link),
             glm(counts ~ outcome + treatment, family = poisson(link = link), data = dobson,
                 control = tight))
}

# Prior weights, one of them 0 (the record is left out): the same Dobson
# layout, weights chosen for this test.
dobson_w <- c(1, 2, 1, 0, 1, 1, 3, 1, 1)
export_glm("dobson_weighted",
           glm(counts ~ outcome + treatment, family = poisson, data = dobson, weights = dobson_w,
               control = tight))

# An aliased column: `dup` = outcome2 + treatment2 is a sum of two columns
# before it; R's glm reports it as NA (aliased) and fits the rest.
dobson$dup <- (dobson$outcome == "2") + (dobson$treatment == "2")
export_glm("dobson_aliased",
           glm(counts ~ outcome + treatment + dup, family = poisson, data = dobson,
               control = tight))

# (e) Days absent from school, MASS::quine; negative binomial model of
# Venables and Ripley (2002, section 7.4), with a finite ML theta.
export_glm_nb("quine_negbin",
              glm.nb(Days ~ Eth + Sex + Age + Lrn, data = quine, control = tight))

# (f) glm.nb where the data show no overdispersion: on ships and Insurance
# the ML theta runs off towards infinity. With the tight control theta.ml
# fails outright (its Newton iterate becomes NA); with the default control
# it stops at its iteration limit with a huge theta and warnings. Both
# outcomes are expected, so the warnings are silenced and only what R
# reached is recorded, for the C++ test to compare with the Poisson limit.
record_runaway <- function(name, formula, data) {
  fit <- tryCatch(suppressWarnings(glm.nb(formula, data = data)), error = function(e) NULL)
  write_summary(name, list(r_theta = if (is.null(fit)) NA else fit$theta))
}
record_runaway("ships_negbin", ships_formula, ships1)
record_runaway("insurance_negbin", insurance_formula, Insurance)

# (g) A young series' window: the first 40 days of R's airquality (New York,
# May 1 - June 9, 1973; Chambers et al. 1983, datasets::airquality), the
# daily maximum temperature in whole degrees F as the response of a
# quasi-Poisson log-linear model with a trend in years and the annual and
# weekly harmonic pairs, the columns series/design.h builds for a series.
# Over 40 days the annual pair is nearly a line and a parabola in time, so
# the fit needs the QR rather than the normal equations (glm/wls.h); the
# refit's fast path (glm/small_fit.h) takes the same QR steps.
aq_day <- 0:39
aq_doy <- 120 + aq_day  # days since 1 January 1973
young <- data.frame(temp = airquality$Temp[1:40], trend = aq_day / 365.25,
                    year_sin = sin(2 * pi * aq_doy / 365.25), year_cos = cos(2 * pi * aq_doy / 365.25),
                    week_sin = sin(2 * pi * aq_day / 7), week_cos = cos(2 * pi * aq_day / 7))
export_glm("young_window_quasipoisson",
           glm(temp ~ trend + year_sin + year_cos + week_sin + week_cos, family = quasipoisson,
               data = young, control = tight))
