# Reference values for the screen before a robust fit, stored in screen_reference.json.
#
# Run from the repository root (the CSV files in tests/reference/mcd_data/ are written by
# tests/reference/make_mcd_data.py):
#
#     Rscript tests/reference/make_screen_reference.R
#
# Needs R and robustbase (Debian: r-base-core, r-cran-robustbase). The tests never run R.
#
# Stored per data set and column: the number of distinct values (length(unique(x))), the most
# frequent value and its count (table(x); the smallest value on a tie), and the octile
# skewness (Q(7/8) + Q(1/8) - 2 Q(1/2)) / (Q(7/8) - Q(1/8)) with R's quantile(type = 7); and
# robustbase's MCD subset size h.alpha.n(0.5, n, p) on a grid of (n, p).

suppressPackageStartupMessages(library(robustbase))

here <- "tests/reference"
sets <- c("iris_setosa", "iris_versicolor", "iris_virginica", "wine_class0", "wine_class1", "wine_class2")

num <- function(x) formatC(x, digits = 17, format = "g")
str <- function(x) paste0("\"", gsub("\"", "\\\\\"", x), "\"")

columns <- function(name) {
  x <- read.csv(file.path(here, "mcd_data", paste0(name, ".csv")), check.names = FALSE)
  parts <- vapply(names(x), function(col) {
    v <- x[[col]]
    tab <- table(v)
    top <- which.max(tab)  # first maximum: the smallest value on a tie
    q <- quantile(v, c(1 / 8, 1 / 2, 7 / 8), type = 7, names = FALSE)
    skew <- if (q[3] > q[1]) (q[3] + q[1] - 2 * q[2]) / (q[3] - q[1]) else NA
    paste0(str(col), ": {\"distinct\": ", length(unique(v)), ", \"modal_value\": ", num(as.numeric(names(tab)[top])),
           ", \"modal_count\": ", as.integer(tab[top]), ", \"octile_skewness\": ",
           if (is.na(skew)) "null" else num(skew), "}")
  }, "")
  paste0(str(name), ": {\"n\": ", nrow(x), ", \"columns\": {", paste(parts, collapse = ", "), "}}")
}

grid <- expand.grid(n = c(11, 12, 50, 51, 150, 357, 1000), p = c(1, 2, 4, 13, 30))
grid <- grid[grid$n > grid$p, ]
h <- vapply(seq_len(nrow(grid)), function(i) {
  paste0("{\"n\": ", grid$n[i], ", \"p\": ", grid$p[i], ", \"h\": ", h.alpha.n(0.5, grid$n[i], grid$p[i]), "}")
}, "")

out <- paste0(
  "{\"R\": ", str(R.version.string), ", \"robustbase\": ", str(as.character(packageVersion("robustbase"))),
  ", \"data\": {", paste(vapply(sets, columns, ""), collapse = ", "), "}",
  ", \"h_alpha_n\": [", paste(h, collapse = ", "), "]}"
)
writeLines(out, file.path(here, "screen_reference.json"))
