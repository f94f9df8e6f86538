#!/usr/bin/env Rscript
# Export R's datasets::Theoph (Boeckmann, Sheiner & Beal; shipped with R) into Plateau's
# canonical CSV (resources/validation/reference/theoph/theoph.csv) plus a JSON note naming source and versions.
# Run from the repository root:  Rscript resources/validation/reference/theoph/export_theoph.R
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))

d <- as.data.frame(datasets::Theoph)
d$Subject <- as.character(d$Subject)
ids <- as.character(sort(as.integer(unique(d$Subject))))

fmt <- function(x) if (is.na(x)) "" else format(x, digits = 15, trim = TRUE)
lines <- "subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,weight_kg"
for (id in ids) {
  s <- d[d$Subject == id, ]
  s <- s[order(s$Time), ]
  wt <- unique(s$Wt); dose <- unique(s$Dose)
  stopifnot(length(wt) == 1, length(dose) == 1)
  # Dose is mg/kg in the dataset: kept as is, so CL and V come out per kg.
  lines <- c(lines, paste(id, "0", "dose", fmt(dose), "0", "", "", "", "oral", fmt(wt), sep = ","))
  for (j in seq_len(nrow(s))) {
    lines <- c(lines, paste(id, fmt(s$Time[j]), "level", "", "", fmt(s$conc[j]), "0", "", "", fmt(wt), sep = ","))
  }
}
writeLines(lines, file.path(here, "theoph.csv"))

json <- paste0('{\n',
  '  "script": "resources/validation/reference/theoph/export_theoph.R",\n',
  '  "source": "R datasets::Theoph (Boeckmann, Sheiner and Beal 1994, as cited in the R help page ?Theoph; also Pinheiro and Bates 2000, Mixed-Effects Models in S and S-PLUS, sections 6.4 and 8.2), shipped with R",\n',
  '  "generatedWith": {"R": "', R.version.string, '"},\n',
  '  "file": "resources/validation/reference/theoph/theoph.csv",\n',
  '  "subjects": ', length(ids), ',\n',
  '  "levels": ', nrow(d), ',\n',
  '  "notes": "One oral dose row per subject at time 0 with amount_mg = Dose exactly as in the dataset, which is mg/kg body weight (not mg): fitted CL is therefore L/h/kg and V is L/kg, as in Pinheiro and Bates 2000. All 132 levels are kept, including the level at time 0 of every subject (0 or small positive values such as 0.74 mg/L for subject 1): they are real data. No level is censored (censored 0, no LLOQ). Subject ids are the R Subject labels 1..12; rows are ordered by numeric subject id, then time. weight_kg is the dataset Wt column (kg), constant per subject."\n',
  '}\n')
writeLines(json, file.path(here, "theoph.json"), sep = "")
cat("wrote", file.path(here, "theoph.csv"), "with", length(ids), "subjects and", nrow(d), "levels\n")
