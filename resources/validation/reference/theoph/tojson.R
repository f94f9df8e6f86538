# Minimal JSON writer for the reference scripts (R here has no JSON package installed).
# Named lists become objects, unnamed lists and vectors of length != 1 become arrays,
# numbers are written with 15 significant digits; NA/NaN/Inf become null.
to_json <- function(x, indent = 0) {
  pad <- function(n) strrep("  ", n)
  esc <- function(s) {
    s <- gsub("\\\\", "\\\\\\\\", s); s <- gsub("\"", "\\\\\"", s)
    s <- gsub("\n", "\\\\n", s); paste0("\"", s, "\"")
  }
  scalar <- function(v) {
    if (is.null(v) || (length(v) == 1 && is.na(v) && !is.character(v))) return("null")
    if (is.logical(v)) return(if (v) "true" else "false")
    if (is.numeric(v)) { if (!is.finite(v)) return("null"); return(format(v, digits = 15, trim = TRUE)) }
    esc(as.character(v))
  }
  if (is.list(x)) {
    if (length(x) == 0) return(if (is.null(names(x))) "[]" else "{}")
    inner <- vapply(seq_along(x), function(i) to_json(x[[i]], indent + 1), "")
    if (!is.null(names(x))) {
      body <- paste0(pad(indent + 1), esc(names(x)), ": ", inner, collapse = ",\n")
      return(paste0("{\n", body, "\n", pad(indent), "}"))
    }
    return(paste0("[\n", paste0(pad(indent + 1), inner, collapse = ",\n"), "\n", pad(indent), "]"))
  }
  if (!is.null(names(x)) && length(x) > 0) return(to_json(as.list(x), indent))
  if (length(x) == 1) return(scalar(x))
  paste0("[", paste(vapply(x, scalar, ""), collapse = ", "), "]")
}
write_json <- function(x, path) writeLines(paste0(to_json(x), "\n"), path, sep = "")
