# Fixture grid of average run lengths from R package spc (Debian r-cran-spc).
# Run from this directory:  Rscript make_fixtures.R
# Writes arl_grid.csv (ARL values) and crit_grid.csv (limits for a target ARL).
# Columns: kind (cusum|ewma), side (up|both), k (CUSUM allowance), lambda (EWMA),
# gap (EWMA gap in units of the lambda unit; spc is run with the effective
# lambda 1-(1-lambda)^gap and the limit rescaled to the nominal EWMA scale),
# h (limit; CUSUM sum units or EWMA multiples of sqrt(lambda/(2-lambda))),
# mu (shift in SDs), hs (head start as a fraction of h), arl, source.
suppressPackageStartupMessages(library(spc))
ver <- as.character(packageVersion("spc"))
rows <- list()
add <- function(...) rows[[length(rows) + 1]] <<- data.frame(...)

for (side in c("one", "two")) for (k in c(0, 0.25, 0.5, 1, 1.5)) for (h in c(1, 2.5, 4, 5, 8))
  for (mu in c(0, 0.5, 1, 2)) for (hsf in c(0, 0.5)) {
    hs <- hsf * h
    if (side == "two" && hs > h / 2 + k) next
    a <- xcusum.arl(k, h, mu, hs = hs, sided = side, r = 60)
    add(kind = "cusum", side = ifelse(side == "one", "up", "both"), k = k, lambda = 0, gap = 1,
        h = h, mu = mu, hs = hsf, arl = sprintf("%.8g", a),
        source = sprintf("spc %s xcusum.arl(k=%g,h=%g,mu=%g,hs=%g,sided='%s',r=60)", ver, k, h, mu, hs, side))
  }

for (side in c("one", "two")) for (l in c(0.05, 0.1, 0.2, 0.5, 1)) for (L in c(2, 2.5, 3))
  for (mu in c(0, 0.5, 1, 2)) for (hsf in c(0, 0.5)) for (gap in c(1, 2.5)) {
    if (side == "two" && hsf > 0) next
    if (gap != 1 && (l == 1 || hsf > 0)) next
    le <- 1 - (1 - l)^gap
    ce <- L * sqrt(l / (2 - l)) / sqrt(le / (2 - le))
    a <- xewma.arl(le, ce, mu, hs = hsf * ce, sided = side, r = 150)
    add(kind = "ewma", side = ifelse(side == "one", "up", "both"), k = 0, lambda = l, gap = gap,
        h = L, mu = mu, hs = hsf, arl = sprintf("%.8g", a),
        source = sprintf("spc %s xewma.arl(l=%.6g,c=%.6g,mu=%g,hs=%.6g,sided='%s',r=150)", ver, le, ce, mu, hsf * ce, side))
  }
write.csv(do.call(rbind, rows), "arl_grid.csv", row.names = FALSE, quote = TRUE)

crit <- list()
for (side in c("one", "two")) for (k in c(0.25, 0.5, 1)) for (L0 in c(50, 370, 1000)) {
  h <- xcusum.crit(k, L0, 0, sided = side, r = 60)
  crit[[length(crit) + 1]] <- data.frame(kind = "cusum", side = ifelse(side == "one", "up", "both"),
    k = k, lambda = 0, arl0 = L0, h = sprintf("%.8g", h),
    source = sprintf("spc %s xcusum.crit(k=%g,L0=%g,sided='%s',r=60)", ver, k, L0, side))
}
for (l in c(0.1, 0.2, 0.5)) for (L0 in c(50, 370, 1000)) {
  h <- xewma.crit(l, L0, 0, sided = "two", r = 150)
  crit[[length(crit) + 1]] <- data.frame(kind = "ewma", side = "both", k = 0, lambda = l, arl0 = L0,
    h = sprintf("%.8g", h), source = sprintf("spc %s xewma.crit(l=%g,L0=%g,sided='two',r=150)", ver, l, L0))
}
write.csv(do.call(rbind, crit), "crit_grid.csv", row.names = FALSE, quote = TRUE)
