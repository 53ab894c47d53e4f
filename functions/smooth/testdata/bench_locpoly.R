# Times R KernSmooth::locpoly for the speed comparison with
# BenchmarkLocalLinear700k (smooth package): one local linear pass, degree 1,
# Gaussian kernel, bandwidth 2, 401-point grid over the data range, on a
# synthetic cohort of 100,000 workers x 7 exams (700k points) shaped like the
# Go benchmark's (ages from 18, irregular gaps). system.time has a 1 ms
# resolution, so each timing covers 20 calls; prints the median over 7
# such batches, per call.
# Run:  Rscript bench_locpoly.R     (needs r-cran-kernsmooth)
suppressPackageStartupMessages(library(KernSmooth))
set.seed(2024)
nw <- 100000; per <- 7
start <- 18 + 30 * runif(nw)
gaps <- matrix(0.3 + 4 * runif(nw * (per - 1)) * runif(nw * (per - 1)), nw)
x <- as.vector(t(cbind(start, start + t(apply(gaps, 1, cumsum)))))
b <- rep(5 * rnorm(nw), each = per)
y <- 120 + 0.5 * (x - 40) + 3 * sin(x / 5) + b + 8 * rnorm(length(x))
stopifnot(length(x) == 700000)
secs <- replicate(7, system.time(for (i in 1:20)
  locpoly(x, y, degree = 1, kernel = "normal", bandwidth = 2, gridsize = 401L,
          range.x = range(x)))[["elapsed"]] / 20)
cat(sprintf("locpoly 700k points, 401 grid, h=2: median %.5f s per call (min %.5f, max %.5f) over 7 batches of 20; %s, KernSmooth %s\n",
            median(secs), min(secs), max(secs), R.version.string,
            as.character(packageVersion("KernSmooth"))))
