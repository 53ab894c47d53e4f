# Kaplan-Meier quantiles for veer/functions/evaluation from R's survival
# package (Debian r-cran-survival; quantile.survfit), on the inputs that
# make_fixtures.py writes to km_input.csv. Run after it, from this
# directory:  Rscript make_fixtures.R
# It writes km_quantiles.csv: method, curve, p, quantile ("NA" when the
# curve never reaches p). For the "lead" curve the time is Y = (age at the
# first signal) - (age at diagnosis), a worker never flagged censored at 0.
suppressPackageStartupMessages(library(survival))
d <- read.csv("km_input.csv", stringsAsFactors = FALSE)
probs <- c(0.25, 0.5, 0.75)
out <- data.frame()
for (m in unique(d$method)) {
  for (cv in c("lead", "healthy")) {
    x <- d[d$method == m & d$curve == cv, ]
    fit <- survfit(Surv(time, status) ~ 1, data = x)
    q <- quantile(fit, probs, conf.int = FALSE)
    out <- rbind(out, data.frame(method = m, curve = cv, p = probs,
                                 quantile = ifelse(is.na(q), "NA", trimws(formatC(q, digits = 17, format = "g")))))
  }
}
write.csv(out, "km_quantiles.csv", row.names = FALSE, quote = FALSE)
cat(sprintf("wrote km_quantiles.csv (survival %s)\n", packageVersion("survival")))
