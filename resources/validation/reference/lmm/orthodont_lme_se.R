#!/usr/bin/env Rscript
# Approximate standard errors of the variance components of the four Orthodont ML fits in
# lme_fit.json (same data, same calls, same control as orthodont_lme.R), for checks stated in
# units of SE ("within 0.5 SE of the exact MLE").
# Method: nlme's apVar, the approximate covariance matrix of the variance parameters of an
# lme fit (inverse of the numerical Hessian of the -2 log-likelihood at the optimum; Pinheiro and
# Bates 2000 section 2.4.3, the matrix behind intervals()) on nlme's "natural" scale: log SD of
# each random effect, log((1 + r)/(1 - r)) of their correlation (unstructured models), log of
# the residual SD. Converted to the reported scale by the delta method:
#   SE(SD) = SD x SE(log SD),  SE(r) = (1 - r^2) / 2 x SE(log((1 + r)/(1 - r))).
# These are large-sample (Wald) SEs; with 27 subjects the SD's sampling distribution is skewed,
# so intervals() (exp of the log-scale Wald interval) is asymmetric on the SD scale.
# Fixed-effect SEs are in lme_fit.json (fixedEffectsSEUnadjusted: sqrt(diag(varFix))).
# Run from the repository root:  Rscript resources/validation/reference/lmm/orthodont_lme_se.R
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))
source(file.path(here, "..", "theoph", "tojson.R"))
suppressPackageStartupMessages(library(nlme))

x <- read.csv(file.path(here, "orthodont.csv"), stringsAsFactors = FALSE)
x$age_c <- x$age - 11
ctrl <- lmeControl(maxIter = 500, msMaxIter = 500, tolerance = 1e-10, niterEM = 100, msTol = 1e-12)

describe <- function(fit, call) {
  av <- fit$apVar
  if (is.character(av)) stop("apVar not available: ", av)
  pars <- attr(av, "Pars")
  vc <- pdMatrix(fit$modelStruct$reStruct[[1]]) * fit$sigma^2
  sds <- sqrt(diag(vc))
  se_log <- sqrt(diag(av))
  correlated <- length(pars) == 4
  names_log <- if (correlated) c("logSdIntercept", "logSdSlope", "logRatioCorrelation", "logResidualSD") else c("logSdIntercept", "logSdSlope", "logResidualSD")
  sigma_index <- length(pars)
  natural <- list(sdIntercept = unname(sds[1] * se_log[1]), sdSlope = unname(sds[2] * se_log[2]))
  if (correlated) {
    r <- vc[1, 2] / (sds[1] * sds[2])
    natural$correlation <- unname((1 - r^2) / 2 * se_log[3])
  }
  natural$residualSD <- unname(fit$sigma * se_log[sigma_index])
  iv <- intervals(fit, which = "var-cov")
  re <- iv$reStruct[[1]]
  ci <- list(sdIntercept = unname(as.numeric(re[1, c("lower", "upper")])),
             sdSlope = unname(as.numeric(re[2, c("lower", "upper")])))
  if (correlated) ci$correlation <- unname(as.numeric(re[3, c("lower", "upper")]))
  ci$residualSD <- unname(as.numeric(iv$sigma[c("lower", "upper")]))
  list(call = call,
       estimates = list(sdIntercept = unname(sds[1]), sdSlope = unname(sds[2]),
                        correlation = if (correlated) unname(vc[1, 2] / (sds[1] * sds[2])) else 0,
                        residualSD = fit$sigma),
       naturalScaleSE = natural,
       workingScale = list(names = names_log, estimates = unname(pars), SE = unname(se_log),
                           covariance = lapply(seq_len(nrow(av)), function(i) unname(as.numeric(av[i, ])))),
       intervals95 = ci)
}

calls <- list(
  age_diagonal = "lme(distance ~ age, random = list(subject = pdDiag(~ age)), method = 'ML')",
  age_unstructured = "lme(distance ~ age, random = list(subject = pdSymm(~ age)), method = 'ML')",
  agec_diagonal = "lme(distance ~ age_c, random = list(subject = pdDiag(~ age_c)), method = 'ML')",
  agec_unstructured = "lme(distance ~ age_c, random = list(subject = pdSymm(~ age_c)), method = 'ML')")
fits <- list(
  age_diagonal = lme(distance ~ age, data = x, random = list(subject = pdDiag(~ age)), method = "ML", control = ctrl),
  age_unstructured = lme(distance ~ age, data = x, random = list(subject = pdSymm(~ age)), method = "ML", control = ctrl),
  agec_diagonal = lme(distance ~ age_c, data = x, random = list(subject = pdDiag(~ age_c)), method = "ML", control = ctrl),
  agec_unstructured = lme(distance ~ age_c, data = x, random = list(subject = pdSymm(~ age_c)), method = "ML", control = ctrl))
out <- lapply(names(fits), function(nm) describe(fits[[nm]], calls[[nm]]))
names(out) <- names(fits)

res <- list(
  script = "resources/validation/reference/lmm/orthodont_lme_se.R",
  source = "R nlme::lme(method = 'ML') apVar (approximate covariance of the variance parameters from the numerical Hessian of the log-likelihood; Pinheiro and Bates 2000, Mixed-Effects Models in S and S-PLUS, section 2.4.3) on nlme's Orthodont data (Potthoff and Roy 1964), read from resources/validation/reference/lmm/orthodont.csv; the same fits as lme_fit.json",
  generatedWith = list(R = R.version.string, nlme = as.character(packageVersion("nlme"))),
  notes = paste(
    "Approximate (Wald) standard errors of the variance components of the ML fits in lme_fit.json.",
    "workingScale: nlme's apVar on its natural scale (log SD of the random intercept and slope, log((1 + r)/(1 - r)) of their",
    "correlation in the unstructured models, log residual SD), with its covariance matrix. naturalScaleSE: the delta method,",
    "SE(SD) = SD x SE(log SD), SE(r) = (1 - r^2)/2 x SE(log((1 + r)/(1 - r))). intervals95: nlme's intervals() (Wald on the",
    "working scale, transformed back; asymmetric). estimates repeat lme_fit.json's SDs and correlation for reading the SEs."),
  fits = out
)
write_json(res, file.path(here, "lme_se.json"))
for (nm in names(out)) cat(nm, unlist(out[[nm]]$estimates), "SE:", unlist(out[[nm]]$naturalScaleSE), "\n")
