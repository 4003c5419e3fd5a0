# Reference values of the MCD from R's robustbase, stored in mcd_robustbase.json.
#
# Run from the repository root, after `python tests/reference/make_mcd_data.py` has written
# the CSV files in tests/reference/mcd_data/:
#
#     Rscript tests/reference/make_mcd_reference.R
#
# Needs R and the robustbase package (Debian: r-base-core, r-cran-robustbase). The tests
# never run R: they read the JSON this script writes.
#
# For each data set, covMcd(x, alpha = 0.5) (h = floor((n + p + 1) / 2)) is run with random
# starts (nsamp = 500, set.seed(20120618) before each call) and with the deterministic MCD (nsamp = "deterministic",
# Hubert, Rousseeuw & Verdonck 2012), each with use.correction = TRUE and FALSE. Stored:
# the log determinant of the covariance (divisor h) of the raw h-subset, computed here from
# `best` (-Inf in an exact fit, where covMcd returns no `best`); `crit` (robustbase's own
# log det, divisor h - 1); the raw subset `best` (0-based); raw and reweighted center and covariance;
# the flagged rows (mcd.wt == 0: distance from the reweighted estimate beyond
# chi2_p(0.975)) and the rows the reweighting dropped (raw.weights == 0), both 0-based; raw.cnp2 and cnp2; warnings; the singularity
# report. Also: robustbase's consistency factors .MCDcons(p, alpha), its small-sample factors
# .MCDcnp2 and .MCDcnp2.rew on a grid, and scaleTau2(x, consistency = FALSE) of a few columns.

suppressPackageStartupMessages(library(robustbase))

here <- "tests/reference"
data_dir <- file.path(here, "mcd_data")

json <- function(x) {
  if (is.null(x)) return("null")
  if (is.list(x)) {
    nm <- names(x)
    if (!is.null(nm) && all(nm != "")) {
      parts <- vapply(seq_along(x), function(i) paste0(json(nm[i]), ": ", json(x[[i]])), "")
      return(paste0("{", paste(parts, collapse = ", "), "}"))
    }
    return(paste0("[", paste(vapply(x, json, ""), collapse = ", "), "]"))
  }
  if (is.matrix(x)) return(json(lapply(seq_len(nrow(x)), function(i) arr(as.vector(x[i, ])))))
  if (length(x) == 0) return("[]")
  if (is.character(x)) {
    esc <- gsub("\\\\", "\\\\\\\\", x)
    esc <- gsub("\"", "\\\\\"", esc)
    esc <- gsub("\n", " ", esc)
    v <- paste0("\"", esc, "\"")
  } else if (is.logical(x)) {
    v <- ifelse(x, "true", "false")
  } else {
    v <- ifelse(is.finite(x), sprintf("%.17g", x), ifelse(is.na(x), "null", ifelse(x > 0, "1e999", "-1e999")))
  }
  if (length(x) == 1 && is.null(attr(x, "as_array"))) return(v)
  paste0("[", paste(v, collapse = ", "), "]")
}
arr <- function(x) { attr(x, "as_array") <- TRUE; x }

raw_logdet <- function(x, best) {
  h <- length(best)
  if (h == 0) return(-Inf)  # exact fit: covMcd returns no `best`, see `singularity`
  xs <- x[best, , drop = FALSE]
  S <- crossprod(sweep(xs, 2, colMeans(xs))) / h
  d <- determinant(S, logarithm = TRUE)
  if (d$sign <= 0) -Inf else as.numeric(d$modulus)
}

fit_one <- function(x, nsamp, correction) {
  msgs <- character(0)
  fit <- withCallingHandlers(
    { set.seed(20120618L); covMcd(x, alpha = 0.5, nsamp = nsamp, use.correction = correction) },
    warning = function(w) { msgs <<- c(msgs, conditionMessage(w)); invokeRestart("muffleWarning") }
  )
  sing <- fit$singularity
  list(
    nsamp = as.character(nsamp),
    use_correction = correction,
    h = fit$quan,
    raw_log_det = raw_logdet(x, fit$best),
    crit = fit$crit,
    best = arr(sort(fit$best) - 1L),
    raw_center = arr(as.vector(fit$raw.center)),
    raw_cov = unname(fit$raw.cov),
    center = arr(as.vector(fit$center)),
    cov = unname(fit$cov),
    flagged = arr(which(fit$mcd.wt == 0) - 1L),
    raw_flagged = if (is.null(fit$raw.weights)) NULL else arr(which(fit$raw.weights == 0) - 1L),
    raw_cnp2 = arr(fit$raw.cnp2),
    cnp2 = arr(fit$cnp2),
    warnings = arr(msgs),
    singularity = if (is.null(sing)) NULL else list(
      kind = as.character(sing$kind),
      count = if (is.null(sing$count)) NULL else sing$count,
      coeff = if (is.null(sing$coeff)) NULL else arr(as.vector(sing$coeff))
    )
  )
}

files <- sort(list.files(data_dir, pattern = "\\.csv$"))
fits <- list()
for (f in files) {
  name <- sub("\\.csv$", "", f)
  x <- as.matrix(read.csv(file.path(data_dir, f), check.names = FALSE))
  runs <- list()
  for (nsamp in list(500, "deterministic")) {
    for (correction in c(TRUE, FALSE)) runs[[length(runs) + 1]] <- fit_one(x, nsamp, correction)
  }
  fits[[name]] <- list(n = nrow(x), p = ncol(x), runs = runs)
  cat(name, "done\n")
}

cons <- list()
for (p in 1:13) for (a in c(0.5, 0.6, 0.75, 0.9)) {
  cons[[length(cons) + 1]] <- list(p = p, alpha = a, factor = robustbase:::.MCDcons(p, a))
}
small <- list()
for (p in c(1, 2, 3, 4, 5, 8, 13)) for (n in c(20, 30, 50, 71, 100, 300, 1000)) for (a in c(0.5, 0.75)) {
  if (n > 2 * p) small[[length(small) + 1]] <- list(
    p = p, n = n, alpha = a,
    raw = robustbase:::.MCDcnp2(p, n, a),
    reweighted = robustbase:::.MCDcnp2.rew(p, n, a)
  )
}
tau <- list()
for (f in c("invented_t3_cluster.csv", "wine_class1.csv")) {
  x <- as.matrix(read.csv(file.path(data_dir, f), check.names = FALSE))
  tau[[sub("\\.csv$", "", f)]] <- arr(apply(x, 2, scaleTau2, consistency = FALSE))
}

out <- list(
  generated_by = "tests/reference/make_mcd_reference.R",
  r_version = R.version.string,
  robustbase_version = as.character(packageVersion("robustbase")),
  fits = fits,
  consistency_factors = cons,
  small_sample_factors = small,
  scale_tau2_raw = tau
)
writeLines(json(out), file.path(here, "mcd_robustbase.json"))
cat("wrote", file.path(here, "mcd_robustbase.json"), "\n")
