# Simulated reference for the Hardin & Rocke (2005) cut-off, stored in hardin_rocke_robustbase.json.
#
# Run from the repository root (about 30 s of CPU):
#
#     Rscript tests/reference/make_hardin_rocke_reference.R
#
# Needs R and robustbase (Debian: r-base-core, r-cran-robustbase; written with robustbase 0.95.0).
# The tests never run R: they read the JSON this script writes.
#
# For each setting (n, p, alpha), `reps` samples of n rows of N(0, I_p) are drawn (set.seed(seed)
# once per setting) and robustbase's covMcd(x, alpha = alpha, use.correction = FALSE) is run
# (random starts, nsamp = 500). From its raw estimate (raw.center, and raw.cov, which then carries
# the consistency factor .MCDcons(p, h/n) only), stored:
#   diag_var: the variance of the diagonal elements of raw.cov, pooled over elements and samples
#             (the Wishart degrees of freedom with that variance is 2 / diag_var);
#   fresh_q975, fresh_q99: the 0.975 and 0.99 quantiles (R type 7) of the squared distances of
#             `fresh` new N(0, I_p) rows per sample from (raw.center, raw.cov), pooled;
#   h: covMcd's quan.

suppressPackageStartupMessages(library(robustbase))

settings <- list(
  list(n = 2000, p = 1, alpha = 0.5, reps = 300, seed = 2005),
  list(n = 2000, p = 1, alpha = 0.75, reps = 300, seed = 2006),
  list(n = 1000, p = 2, alpha = 0.5, reps = 200, seed = 2007),
  list(n = 1000, p = 2, alpha = 0.75, reps = 200, seed = 2008),
  list(n = 400, p = 5, alpha = 0.5, reps = 200, seed = 2009)
)
fresh <- 200

num <- function(x) formatC(x, digits = 17, format = "g")
out <- character()
for (s in settings) {
  set.seed(s$seed)
  diags <- numeric()
  d2 <- numeric()
  h <- NA
  for (r in seq_len(s$reps)) {
    x <- matrix(rnorm(s$n * s$p), s$n, s$p)
    f <- covMcd(x, alpha = s$alpha, use.correction = FALSE)
    h <- f$quan
    diags <- c(diags, diag(f$raw.cov))
    y <- matrix(rnorm(fresh * s$p), fresh, s$p)
    d2 <- c(d2, mahalanobis(y, f$raw.center, f$raw.cov))
  }
  q <- quantile(d2, c(0.975, 0.99), type = 7, names = FALSE)
  out <- c(out, paste0(
    "{\"n\": ", s$n, ", \"p\": ", s$p, ", \"alpha\": ", s$alpha, ", \"h\": ", h,
    ", \"reps\": ", s$reps, ", \"fresh\": ", fresh, ", \"seed\": ", s$seed,
    ", \"diag_var\": ", num(var(diags)), ", \"fresh_q975\": ", num(q[1]),
    ", \"fresh_q99\": ", num(q[2]), "}"
  ))
}
writeLines(c(
  "{",
  paste0("\"robustbase\": \"", as.character(packageVersion("robustbase")), "\","),
  paste0("\"R\": \"", R.version$major, ".", R.version$minor, "\","),
  "\"settings\": [",
  paste(out, collapse = ",\n"),
  "]}"
), "tests/reference/hardin_rocke_robustbase.json")
