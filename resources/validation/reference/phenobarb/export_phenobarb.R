#!/usr/bin/env Rscript
# Export nlme's Phenobarb (Grasela & Donn 1985, as cited in R's ?Phenobarb; shipped with nlme)
# into Plateau's canonical CSV (resources/validation/reference/phenobarb/phenobarb.csv) plus a JSON note naming
# source and versions. Run from the repository root:
#   Rscript resources/validation/reference/phenobarb/export_phenobarb.R
suppressPackageStartupMessages(library(nlme))
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))

d <- as.data.frame(Phenobarb)
d$Subject <- as.character(d$Subject)
ids <- as.character(sort(as.integer(unique(d$Subject))))

fmt <- function(x) if (is.na(x)) "" else format(x, digits = 15, trim = TRUE)
lines <- "subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,weight_kg"
nDose <- 0; nLevel <- 0
for (id in ids) {
  s <- d[d$Subject == id, ]
  s <- s[order(s$time), ]
  wt <- unique(s$Wt)
  stopifnot(length(wt) == 1)
  for (j in seq_len(nrow(s))) {
    if (!is.na(s$dose[j])) {
      # dose per kg body weight: amount in mg = dose x Wt; an IV bolus (see the notes on units).
      lines <- c(lines, paste(id, fmt(s$time[j]), "dose", fmt(s$dose[j] * wt), "0", "", "", "", "iv", fmt(wt), sep = ","))
      nDose <- nDose + 1
    }
    if (!is.na(s$conc[j])) {
      # conc taken as mg/L (see the notes on units).
      lines <- c(lines, paste(id, fmt(s$time[j]), "level", "", "", fmt(s$conc[j]), "0", "", "", fmt(wt), sep = ","))
      nLevel <- nLevel + 1
    }
  }
}
writeLines(lines, file.path(here, "phenobarb.csv"))

json <- paste0('{\n',
  '  "script": "resources/validation/reference/phenobarb/export_phenobarb.R",\n',
  '  "source": "nlme::Phenobarb (Grasela and Donn 1985, Dev Pharmacol Ther 8:374-383, as cited in the R help page ?Phenobarb; Pinheiro and Bates 2000, Mixed-Effects Models in S and S-PLUS, section 6.4), shipped with R package nlme ', as.character(packageVersion("nlme")), '",\n',
  '  "generatedWith": {"R": "', R.version.string, '", "nlme": "', as.character(packageVersion("nlme")), '"},\n',
  '  "file": "resources/validation/reference/phenobarb/phenobarb.csv",\n',
  '  "subjects": ', length(ids), ',\n',
  '  "doses": ', nDose, ',\n',
  '  "levels": ', nLevel, ',\n',
  '  "notes": "59 neonates, repeated intravenous phenobarbital doses. Units: the help page gives dose in ug/kg and conc in ug/L, but the values (loading doses 15-25 per kg giving levels of 10-30) are those of mg/kg and mg/L (phenobarbital volume near 1 L/kg), so dose is read as mg/kg and conc as mg/L; units only rescale CL and V, never the likelihood or the random-effect SDs. amount_mg = dose x Wt (an IV bolus, duration 0). So fitted CL is L/h and V is L for the whole neonate. weight_kg is Wt (kg), constant per subject. No level is censored. Rows are ordered by numeric subject id, then time; no row of the dataset holds both a dose and a level."\n',
  '}\n')
writeLines(json, file.path(here, "phenobarb.json"), sep = "")
cat("wrote", file.path(here, "phenobarb.csv"), "with", length(ids), "subjects,", nDose, "doses and", nLevel, "levels\n")
