# Regenerates locpoly_data.csv and locpoly_fit.csv, the outside check of
# smooth.LocalLinear: R KernSmooth::locpoly (degree 1, Gaussian kernel,
# gridsize 401, linear binning, truncation at 4 bandwidths) on a synthetic
# data set. Run from this directory:
#   Rscript make_locpoly_fixture.R
# Needs the Debian package r-cran-kernsmooth.
suppressPackageStartupMessages(library(KernSmooth))
set.seed(20240611)
n <- 3000
# Ages strictly inside the grid range [18, 65], denser in mid-life, so that
# no point sits exactly on the range ends (locpoly drops a point at the
# upper end when truncate = TRUE).
x <- 18 + 47 * rbeta(n, 1.6, 1.4)
x <- pmin(pmax(x, 18.001), 64.999)
y <- 120 + 0.45 * (x - 40) + 6 * sin(x / 6) + rnorm(n, sd = 4 + 0.1 * (x - 18))
fmt <- function(v) sprintf("%.17g", v)
write.csv(data.frame(x = fmt(x), y = fmt(y)), "locpoly_data.csv",
          row.names = FALSE, quote = FALSE)
out <- NULL
for (h in c(0.35, 2.5, 12)) {
  f <- locpoly(x, y, degree = 1, kernel = "normal", bandwidth = h,
               gridsize = 401L, range.x = c(18, 65))
  out <- rbind(out, data.frame(bandwidth = fmt(h), x = fmt(f$x), y = fmt(f$y)))
}
con <- file("locpoly_fit.csv", "w")
writeLines(sprintf("# source: %s, KernSmooth %s, locpoly(x, y, degree=1, kernel='normal', gridsize=401, range.x=c(18,65)); script make_locpoly_fixture.R",
                   R.version.string, as.character(packageVersion("KernSmooth"))), con)
write.table(out, con, sep = ",", row.names = FALSE, quote = FALSE)
close(con)
