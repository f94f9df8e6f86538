#!/usr/bin/env Rscript
# nlme fits of R's datasets::Theoph, stored as resources/validation/reference/theoph/nlme_fit.json.
# (1) Plateau's reference model: one-compartment first-order absorption, log-normal BSV on
#     CL, V, ka with diagonal Omega, additive residual error, maximum likelihood (method = "ML").
# (2) The published models of Pinheiro & Bates 2000 section 8.2 (Mixed-Effects Models in S and
#     S-PLUS), re-run here exactly as in the book's script shipped with nlme (scripts/ch08.R):
#     fm1Theo.nlme (general Omega on lKe, lKa, lCl), fm2Theo.nlme (pdDiag on the three),
#     fm3Theo.nlme (pdDiag on lKa, lCl).
# Run from the repository root:  Rscript resources/validation/reference/theoph/nlme_fit.R
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))
source(file.path(here, "tojson.R"))
suppressPackageStartupMessages(library(nlme))

# Run an expression, keeping its warnings as data for the JSON instead of losing them.
collect <- function(expr) {
  w <- character(0)
  value <- withCallingHandlers(expr, warning = function(m) { w <<- c(w, conditionMessage(m)); invokeRestart("muffleWarning") })
  attr(value, "fitWarnings") <- w
  value
}

ctrl <- nlmeControl(maxIter = 200, msMaxIter = 200, tolerance = 1e-8)

# (1) Same model as exact_mle.py: C = D ka / (V (ka - CL/V)) (exp(-CL/V t) - exp(-ka t)).
fitRef <- collect(nlme(conc ~ Dose * exp(lKa) / (exp(lV) * (exp(lKa) - exp(lCl - lV))) *
                 (exp(-exp(lCl - lV) * Time) - exp(-exp(lKa) * Time)),
               data = Theoph,
               fixed = lCl + lV + lKa ~ 1,
               random = pdDiag(lCl + lV + lKa ~ 1),
               start = c(lCl = log(0.04), lV = log(0.5), lKa = log(1.5)),
               method = "ML", control = ctrl))

describe <- function(fit, label, call) {
  fe <- fixef(fit)
  re <- pdMatrix(fit$modelStruct$reStruct[[1]]) * fit$sigma^2
  sdre <- sqrt(diag(re))
  corr <- cov2cor(re)
  tt <- summary(fit)$tTable
  list(
    label = label,
    call = call,
    method = fit$method,
    fixedEffects = as.list(fe),
    fixedEffectsSE = as.list(tt[, "Std.Error"]),
    fixedEffectsSEUnadjusted = as.list(sqrt(diag(fit$varFix))),
    randomEffectSD = as.list(sdre),
    randomEffectCorrelation = lapply(seq_len(nrow(corr)), function(i) as.numeric(corr[i, ])),
    randomEffectNames = colnames(re),
    residualSD = fit$sigma,
    logLik = as.numeric(logLik(fit)),
    minus2LL = -2 * as.numeric(logLik(fit)),
    df = attr(logLik(fit), "df"),
    AIC = AIC(fit),
    BIC = BIC(fit),
    nObservations = fit$dims$N,
    nSubjects = fit$dims$ngrps[["Subject"]],
    fitWarnings = as.list(attr(fit, "fitWarnings"))
  )
}

ref <- describe(fitRef, "Plateau reference model: lCl, lV, lKa with pdDiag BSV, additive error, ML",
  "nlme(conc ~ Dose*exp(lKa)/(exp(lV)*(exp(lKa)-exp(lCl-lV)))*(exp(-exp(lCl-lV)*Time)-exp(-exp(lKa)*Time)), data = Theoph, fixed = lCl + lV + lKa ~ 1, random = pdDiag(lCl + lV + lKa ~ 1), start = c(log(0.04), log(0.5), log(1.5)), method = 'ML')")
fe <- fixef(fitRef)
ref$naturalScale <- list(CL_L_per_h_per_kg = exp(fe[["lCl"]]), V_L_per_kg = exp(fe[["lV"]]), ka_per_h = exp(fe[["lKa"]]))

# (2) Published models, as in nlme's scripts/ch08.R (Pinheiro & Bates 2000 section 8.2).
fm1Theo.lis <- nlsList(conc ~ SSfol(Dose, Time, lKe, lKa, lCl), data = Theoph)
fm1Theo.nlme <- collect(nlme(fm1Theo.lis))
fm2Theo.nlme <- collect(update(fm1Theo.nlme, random = pdDiag(lKe + lKa + lCl ~ 1)))
fm3Theo.nlme <- collect(update(fm2Theo.nlme, random = pdDiag(lKa + lCl ~ 1)))
pub <- list(
  fm1Theo.nlme = describe(fm1Theo.nlme, "fm1Theo.nlme: general positive-definite Omega on lKe, lKa, lCl",
    "nlme(nlsList(conc ~ SSfol(Dose, Time, lKe, lKa, lCl), data = Theoph))"),
  fm2Theo.nlme = describe(fm2Theo.nlme, "fm2Theo.nlme: pdDiag Omega on lKe, lKa, lCl",
    "update(fm1Theo.nlme, random = pdDiag(lKe + lKa + lCl ~ 1))"),
  fm3Theo.nlme = describe(fm3Theo.nlme, "fm3Theo.nlme: pdDiag Omega on lKa, lCl (no BSV on lKe)",
    "update(fm2Theo.nlme, random = pdDiag(lKa + lCl ~ 1))")
)
for (nm in names(pub)) {
  f <- fixef(get(nm))
  pub[[nm]]$naturalScale <- list(CL_L_per_h_per_kg = exp(f[["lCl"]]), V_L_per_kg = exp(f[["lCl"]] - f[["lKe"]]),
                                 ka_per_h = exp(f[["lKa"]]), ke_per_h = exp(f[["lKe"]]))
}

out <- list(
  script = "resources/validation/reference/theoph/nlme_fit.R",
  source = "R nlme::nlme (Pinheiro and Bates 2000, Mixed-Effects Models in S and S-PLUS, section 8.2; the published models re-run from the book's script shipped with nlme, scripts/ch08.R) on R datasets::Theoph (Boeckmann, Sheiner and Beal 1994)",
  generatedWith = list(R = R.version.string, nlme = as.character(packageVersion("nlme"))),
  notes = paste(
    "Dose is mg/kg, so CL is L/h/kg and V is L/kg. All 132 levels are used, including the time-0 levels.",
    "nlme's logLik is the first-order conditional (Lindstrom-Bates) linearisation around the conditional modes,",
    "an approximation of the marginal likelihood, not its exact value: compare with exact_mle.json (adaptive",
    "Gauss-Hermite quadrature) for the exact maximum-likelihood estimate and -2LL. randomEffectSD are SDs on the",
    "log scale; residualSD is the additive error SD in mg/L. 'reference' is the same statistical model as",
    "exact_mle.py. In the published models of section 8.2 the parameters are lKe = log(CL/V), lKa, lCl (SSfol);",
    "a diagonal Omega on (lKe, lKa, lCl) is a different BSV structure from a diagonal Omega on (lCl, lV, lKa), so",
    "fm2Theo.nlme is close to but not the same model as 'reference'. Naming follows the book's script (ch08.R):",
    "fm1Theo.nlme has the general Omega, fm2Theo.nlme the pdDiag one, fm3Theo.nlme drops the BSV of lKe.",
    "fitWarnings lists the warnings nlme gave for that fit (fm1Theo.nlme, run with the book's default controls, warns that one inner LME step did not converge; its result matches the book).",
    "fixedEffectsSE are summary(fit) standard errors of the fixed effects (log scale) from nlme's linearised information, which for ML fits nlme multiplies by sqrt(N/(N - p)); fixedEffectsSEUnadjusted = sqrt(diag(varFix)) without that factor."),
  reference = ref,
  published = pub
)
write_json(out, file.path(here, "nlme_fit.json"))
print(summary(fitRef)); print(VarCorr(fitRef))
print(fm1Theo.nlme); print(fm2Theo.nlme); print(fm3Theo.nlme)
