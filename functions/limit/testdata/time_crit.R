# Times R spc's xcusum.crit (default r = 30) for the benchmark ratio quoted in
# the limit package's notes. Run:  Rscript time_crit.R
suppressPackageStartupMessages(library(spc))
n <- 2000
t <- system.time(for (i in 1:n) h <- xcusum.crit(0.5, 930.887, 0))[["elapsed"]]
cat(sprintf("xcusum.crit(0.5, 930.887, 0) = %.6f; %.3f ms per call over %d calls\n", h, 1000 * t / n, n))
t <- system.time(for (i in 1:n) h <- xcusum.crit(0.5, 465.44, 0, sided = "two"))[["elapsed"]]
cat(sprintf("xcusum.crit(0.5, 465.44, 0, sided='two') = %.6f; %.3f ms per call over %d calls\n", h, 1000 * t / n, n))
n <- 200
t <- system.time(for (i in 1:n) h <- xewma.crit(0.1, 499.58, 0, sided = "two"))[["elapsed"]]
cat(sprintf("xewma.crit(0.1, 499.58, 0, sided='two') = %.6f; %.3f ms per call over %d calls\n", h, 1000 * t / n, n))
