# Times the R pipeline that BenchmarkFit700k (cmd/veer, fit_bench_test.go)
# compares `veer fit` with, on the same CSV file: base R's read.csv, the
# plug-in bandwidth of KernSmooth::dpill (Ruppert, Sheather & Wand 1995) and
# one local linear smooth of the mean by KernSmooth::locpoly (Gaussian
# kernel, 401-point grid). It is a baseline for speed only: veer fit does
# more (leave-one-worker-out cross-validated bandwidths for the mean and
# the SD curve, the serial-correlation estimate and its test, diagnostics,
# the model file).
#
# Run:  Rscript bench_fit.R FILE.csv [REPS] [AGE_COLUMN] [VALUE_COLUMN]
# (needs r-cran-kernsmooth; the benchmark writes FILE.csv and runs this
# script itself when Rscript is on the PATH). Prints one line per
# repetition, "elapsed SECONDS", then a summary line. Times are wall-clock
# seconds inside R, without R's start-up, as the Go side times veer fit
# without the process start.
suppressPackageStartupMessages(library(KernSmooth))
args <- commandArgs(trailingOnly = TRUE)
if (length(args) < 1) stop("usage: Rscript bench_fit.R FILE.csv [REPS] [AGE_COLUMN] [VALUE_COLUMN]")
path <- args[1]
reps <- if (length(args) >= 2) as.integer(args[2]) else 3L
age <- if (length(args) >= 3) args[3] else "age"
value <- if (length(args) >= 4) args[4] else "sbp"
pipeline <- function() {
  d <- read.csv(path)
  x <- d[[age]]
  y <- d[[value]]
  h <- dpill(x, y)
  fit <- locpoly(x, y, degree = 1, kernel = "normal", bandwidth = h, gridsize = 401L)
  list(n = length(x), h = h, fit = fit)
}
times <- numeric(reps)
for (i in seq_len(reps)) {
  t0 <- proc.time()[["elapsed"]]
  r <- pipeline()
  times[i] <- proc.time()[["elapsed"]] - t0
  cat(sprintf("elapsed %.4f\n", times[i]))
}
cat(sprintf("read.csv + dpill + locpoly on %d rows (h = %.4f): median %.4f s over %d; %s, KernSmooth %s\n",
            r$n, r$h, median(times), reps, R.version.string, as.character(packageVersion("KernSmooth"))))
