# HC0-robust Wald F of the excluded instruments in the 1995 first stage:
# log(rprice) on 1, log(rincome) (exogenous), salestax and cigtax
# (excluded), the regression of instruments.TestFirstStageCigarettes.
# Run from this folder:  Rscript robust_f.R
# Needs R with AER (brings sandwich and lmtest; Debian package r-cran-aer).
#
# F = b_q' V_q^-1 b_q / q, with b_q the coefficients of the q = 2 excluded
# instruments and V_q their block of the HC0 covariance
# (Z'Z)^-1 (sum e_n^2 z_n z_n') (Z'Z)^-1. Computed three ways, which must
# agree: lmtest::waldtest with sandwich::vcovHC(type = "HC0"), AER's ivreg
# summary(diagnostics = TRUE) "Weak instruments" row with the same vcov, and
# the formula above written out.
suppressPackageStartupMessages({
  library(AER)
  library(sandwich)
  library(lmtest)
})

d <- read.csv("cigarettes.csv")
d <- d[d$year == 1995, ]

full <- lm(log(rprice) ~ log(rincome) + salestax + cigtax, data = d)
restricted <- lm(log(rprice) ~ log(rincome), data = d)
V <- vcovHC(full, type = "HC0")
wald <- waldtest(restricted, full, vcov = V, test = "F")
f_wald <- wald$F[2]

iv <- ivreg(log(packs) ~ log(rprice) + log(rincome) | log(rincome) + salestax + cigtax, data = d)
diag <- summary(iv, vcov = function(m) vcovHC(m, type = "HC0"), diagnostics = TRUE)$diagnostics
f_aer <- diag["Weak instruments", "statistic"]

q <- c("salestax", "cigtax")
b <- coef(full)[q]
f_formula <- drop(t(b) %*% solve(V[q, q], b)) / length(q)

cat(sprintf("R %s; AER %s, sandwich %s, lmtest %s\n", paste(R.version$major, R.version$minor, sep = "."),
            packageVersion("AER"), packageVersion("sandwich"), packageVersion("lmtest")))
cat(sprintf("waldtest %.17g\nivreg diagnostics %.17g\nformula %.17g\n", f_wald, f_aer, f_formula))
cat(sprintf("largest relative spread %.2g\n", diff(range(c(f_wald, f_aer, f_formula))) / f_formula))
