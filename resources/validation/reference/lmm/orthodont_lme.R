#!/usr/bin/env Rscript
# Linear mixed model reference on nlme's Orthodont data (Potthoff and Roy 1964; shipped with R's
# nlme; Pinheiro and Bates 2000 sections 1.4 and 4.2): exact maximum likelihood by nlme::lme
# (method = "ML"). Exports the data to resources/validation/reference/lmm/orthodont.csv and writes lme_fit.json.
# Model: distance ~ age (or age_c = age - 11), random intercept and slope per Subject,
# (a) diagonal (pdDiag) and (b) unstructured (pdSymm) random-effects covariance.
# Run from the repository root:  Rscript resources/validation/reference/lmm/orthodont_lme.R
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))
source(file.path(here, "..", "theoph", "tojson.R"))
suppressPackageStartupMessages(library(nlme))

d <- as.data.frame(Orthodont)
out_csv <- data.frame(subject = as.character(d$Subject), age = d$age, distance = d$distance, sex = as.character(d$Sex))
out_csv <- out_csv[order(out_csv$subject, out_csv$age), ]
write.csv(out_csv, file.path(here, "orthodont.csv"), row.names = FALSE, quote = FALSE)

# Fit from the exported CSV, so that both libraries see exactly the same numbers.
x <- read.csv(file.path(here, "orthodont.csv"), stringsAsFactors = FALSE)
x$age_c <- x$age - 11
ctrl <- lmeControl(maxIter = 500, msMaxIter = 500, tolerance = 1e-10, niterEM = 100, msTol = 1e-12)

describe <- function(fit, label, call) {
  vc <- pdMatrix(fit$modelStruct$reStruct[[1]]) * fit$sigma^2
  sds <- sqrt(diag(vc))
  tt <- summary(fit)$tTable
  list(label = label, call = call, method = fit$method,
       fixedEffects = as.list(fixef(fit)),
       fixedEffectsSE = as.list(tt[, "Std.Error"]),
    fixedEffectsSEUnadjusted = as.list(sqrt(diag(fit$varFix))),
       randomEffectSD = as.list(sds),
       randomEffectCorrelation = unname(vc[1, 2] / (sds[1] * sds[2])),
       randomEffectCovariance = lapply(seq_len(nrow(vc)), function(i) as.numeric(vc[i, ])),
       residualSD = fit$sigma,
       logLik = as.numeric(logLik(fit)),
       minus2LL = -2 * as.numeric(logLik(fit)),
       df = attr(logLik(fit), "df"),
       AIC = AIC(fit), BIC = BIC(fit),
       nObservations = fit$dims$N, nSubjects = fit$dims$ngrps[["subject"]])
}

fits <- list(
  age_diagonal = describe(lme(distance ~ age, data = x, random = list(subject = pdDiag(~ age)), method = "ML", control = ctrl),
    "distance ~ age, random intercept and slope, diagonal covariance",
    "lme(distance ~ age, random = list(subject = pdDiag(~ age)), method = 'ML')"),
  age_unstructured = describe(lme(distance ~ age, data = x, random = list(subject = pdSymm(~ age)), method = "ML", control = ctrl),
    "distance ~ age, random intercept and slope, unstructured covariance",
    "lme(distance ~ age, random = list(subject = pdSymm(~ age)), method = 'ML')"),
  agec_diagonal = describe(lme(distance ~ age_c, data = x, random = list(subject = pdDiag(~ age_c)), method = "ML", control = ctrl),
    "distance ~ age_c (age - 11), random intercept and slope, diagonal covariance",
    "lme(distance ~ age_c, random = list(subject = pdDiag(~ age_c)), method = 'ML')"),
  agec_unstructured = describe(lme(distance ~ age_c, data = x, random = list(subject = pdSymm(~ age_c)), method = "ML", control = ctrl),
    "distance ~ age_c (age - 11), random intercept and slope, unstructured covariance",
    "lme(distance ~ age_c, random = list(subject = pdSymm(~ age_c)), method = 'ML')")
)
for (nm in names(fits)) fits[[nm]]$randomEffectNames <- names(fits[[nm]]$randomEffectSD)
for (nm in grep("diagonal", names(fits), value = TRUE)) fits[[nm]]$randomEffectCorrelation <- 0

res <- list(
  script = "resources/validation/reference/lmm/orthodont_lme.R",
  source = "R nlme::lme(method = 'ML') (Pinheiro and Bates 2000, Mixed-Effects Models in S and S-PLUS) on nlme's Orthodont data (Potthoff and Roy 1964, Biometrika 51:313-326), exported to resources/validation/reference/lmm/orthodont.csv",
  generatedWith = list(R = R.version.string, nlme = as.character(packageVersion("nlme"))),
  notes = paste(
    "Exact maximum likelihood (not REML) of a linear mixed model: logLik includes every constant.",
    "108 observations, 27 subjects (16 male, 11 female), ages 8, 10, 12, 14 years; distance in mm. Sex is exported but",
    "not used in these models. randomEffectSD are the SDs of the random intercept and slope, randomEffectCorrelation",
    "their correlation (0 by construction in the diagonal models), residualSD the within-subject SD.",
    "age_c = age - 11 centres the regressor: for the unstructured model this is a reparameterisation (same logLik,",
    "same slope and residual SD, different intercept SD and correlation); for the diagonal model it is a different",
    "model (independence of intercept and slope at age 11 instead of age 0), so its logLik differs.",
    "fixedEffectsSE are summary(fit) standard errors, which for an ML fit nlme multiplies by sqrt(N/(N - p)) (N observations, p fixed effects); fixedEffectsSEUnadjusted = sqrt(diag(varFix)) without that factor, the plain ML value that statsmodels reports. The same fits by statsmodels MixedLM are in mixedlm_fit.json."),
  fits = fits
)
write_json(res, file.path(here, "lme_fit.json"))
for (nm in names(fits)) cat(nm, unlist(fits[[nm]]$fixedEffects), unlist(fits[[nm]]$randomEffectSD), fits[[nm]]$randomEffectCorrelation, fits[[nm]]$residualSD, fits[[nm]]$logLik, "\n")
