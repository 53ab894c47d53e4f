# Fixture grid for the multivariate EWMA (MEWMA) from R package spc
# (Debian r-cran-spc). Run from this directory:  Rscript make_mewma.R
# Writes mewma_grid.csv with columns:
#   what   crit (the limit h for an in-control ARL) or arl (the ARL at h)
#   lambda smoothing constant; p number of variables (markers)
#   h      limit on the T2 scale of Lowry et al. (1992)
#   delta  shift as a Mahalanobis distance (spc's delta argument is its
#          square, the noncentrality parameter: checked by simulation)
#   arl    average run length (in-control target for crit rows)
#   source the spc call
# All values use r = 40 quadrature nodes: spc's default r = 20 is
# accurate to about 1e-3 out of control (10.13196 against 10.12143 for lambda 0.1,
# p 2, delta 1) and to 3e-5 in control (200 against 199.99462 for lambda 0.05,
# p 10), r = 40 to about 1e-6 (r = 60 and 80 give the same digits).
suppressPackageStartupMessages(library(spc))
ver <- as.character(packageVersion("spc"))
rows <- list()
add <- function(...) rows[[length(rows) + 1]] <<- data.frame(...)
f <- function(x) sprintf("%.10g", x)
for (l in c(0.05, 0.1, 0.2, 0.5)) for (p in c(2, 3, 4, 5, 10)) for (L0 in c(100, 200, 500)) {
  h <- mewma.crit(l, L0, p, r = 40)
  add(what = "crit", lambda = l, p = p, h = f(h), delta = 0, arl = L0,
      source = sprintf("spc %s mewma.crit(l=%g,L0=%g,p=%d,r=40)", ver, l, L0, p))
  a <- mewma.arl(l, h, p, r = 40)
  add(what = "arl", lambda = l, p = p, h = f(h), delta = 0, arl = f(a),
      source = sprintf("spc %s mewma.arl(l=%g,cE=%s,p=%d,r=40)", ver, l, f(h), p))
}
for (l in c(0.1, 0.2)) for (p in c(2, 3, 5)) for (d in c(0.5, 1, 2)) {
  h <- mewma.crit(l, 200, p, r = 40)
  a <- mewma.arl(l, h, p, delta = d^2, r = 40)
  add(what = "arl", lambda = l, p = p, h = f(h), delta = d, arl = f(a),
      source = sprintf("spc %s mewma.arl(l=%g,cE=%s,p=%d,delta=%g,r=40)", ver, l, f(h), p, d^2))
}
write.csv(do.call(rbind, rows), "mewma_grid.csv", row.names = FALSE, quote = TRUE)
cat("wrote mewma_grid.csv\n")
