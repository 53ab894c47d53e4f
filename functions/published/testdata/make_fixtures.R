# Check values for package published, from R's VGAM (Debian r-cran-vgam).
# Run from this folder: Rscript make_fixtures.R   (writes lms_vgam.csv)
#
# Rows of kind "centile": the p-th quantile of the LMS (Box-Cox normal)
# distribution, VGAM::qlms.bcn(p, lambda = L, mu = M, sigma = S); for
# L = 0, where qlms.bcn has no limit form, stats::qlnorm(p, log(M), S).
# A quantile that does not exist (1 + L*S*qnorm(p) <= 0) is NaN in R and
# written as "NaN".
#
# Rows of kind "z": the standard normal deviate of reading y, found by
# solving qlms.bcn(pnorm(z), L, M, S) = y for z with uniroot (tolerance
# 1e-13), i.e. by inverting VGAM's quantile function numerically rather
# than by the closed form the Go code uses; for L = 0,
# qnorm(plnorm(y, log(M), S)).
suppressPackageStartupMessages(library(VGAM))

Ls <- c(-2, -1, -0.5, 0, 0.5, 1, 1.5, 2)
Ms <- c(3.5, 120)
Ss <- c(0.05, 0.1, 0.3)
ps <- c(0.001, 0.03, 0.05, 0.5, 0.95, 0.97, 0.999)

out <- data.frame(kind = character(), L = numeric(), M = numeric(), S = numeric(),
                  x = numeric(), value = numeric(), stringsAsFactors = FALSE)
add <- function(kind, L, M, S, x, value) {
  out[nrow(out) + 1, ] <<- list(kind, L, M, S, x, value)
}
for (L in Ls) for (M in Ms) for (S in Ss) {
  for (p in ps) {
    q <- if (L == 0) qlnorm(p, log(M), S) else suppressWarnings(qlms.bcn(p, lambda = L, mu = M, sigma = S))
    add("centile", L, M, S, p, q)
  }
  # Readings spread over the distribution: at the 2nd, 30th, 50th, 80th
  # and 99th centiles (where they exist) and two round values near M.
  ys <- c(M * 0.9, M * 1.15)
  for (p in c(0.02, 0.3, 0.8, 0.99)) {
    q <- if (L == 0) qlnorm(p, log(M), S) else suppressWarnings(qlms.bcn(p, lambda = L, mu = M, sigma = S))
    if (is.finite(q)) ys <- c(ys, signif(q, 6))
  }
  for (y in ys) {
    if (L == 0) {
      z <- qnorm(plnorm(y, log(M), S))
    } else {
      f <- function(z) qlms.bcn(pnorm(z), lambda = L, mu = M, sigma = S) - y
      # The deviate's support: 1 + L*S*z > 0.
      lo <- -8; hi <- 8
      if (L > 0) lo <- max(lo, -1 / (L * S) + 1e-9)
      if (L < 0) hi <- min(hi, -1 / (L * S) - 1e-9)
      z <- uniroot(f, c(lo, hi), tol = 1e-13)$root
    }
    add("z", L, M, S, y, z)
  }
}
for (k in c("L", "M", "S", "x", "value")) out[[k]] <- sprintf("%.17g", out[[k]])
write.csv(out, "lms_vgam.csv", row.names = FALSE, quote = FALSE)
cat("wrote", nrow(out), "rows to lms_vgam.csv\n")
