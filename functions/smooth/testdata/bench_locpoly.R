# Times R KernSmooth::locpoly for the speed comparison with
# BenchmarkLocalLinear700k (smooth package): one local linear pass, degree 1,
# Gaussian kernel, bandwidth 2, 401-point grid over the data range, on a
# synthetic cohort of 100,000 workers x 7 exams (700k points) shaped like the
# Go benchmark's (ages from 18, irregular gaps). The running time of
# locpoly depends on the number of points, the grid and the bandwidth, not
# on the values. Prints single-call and batch timings.
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
fit <- function() locpoly(x, y, degree = 1, kernel = "normal", bandwidth = 2,
                          gridsize = 401L, range.x = range(x))
# Single calls: system.time has a 1 ms resolution, fine for calls of a few ms.
single <- replicate(21, system.time(fit())[["elapsed"]])
# Batches of 20 calls: include R's garbage collection of the big vectors
# each call allocates, as a Go benchmark's ns/op includes Go's.
batch <- replicate(5, system.time(for (i in 1:20) fit())[["elapsed"]] / 20)
cat(sprintf("locpoly 700k points, 401 grid, h=2: single call median %.4f s (min %.4f) over 21; mean per call in batches of 20: median %.4f s over 5 batches; %s, KernSmooth %s\n",
            median(single), min(single), median(batch), R.version.string,
            as.character(packageVersion("KernSmooth"))))
