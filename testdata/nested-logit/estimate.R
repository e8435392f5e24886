# Reference estimates for the plain nested logit on products.csv.
# Run from this folder:  Rscript estimate.R      (writes expected.json)
# Needs R with AER (brings sandwich), gmm and jsonlite (only to read truth.json).
#
# Model (Berry 1994): ln s_j - ln s_0 = b0 + b1 x1 + b2 x2 + alpha price + rho ln s_{j|g} + xi
# with s_{j|g} = s_j / sum_{k in g} s_k (g = market x segment), price and ln s_{j|g}
# endogenous. Instruments Z = [1, x1, x2, excluded].
suppressPackageStartupMessages({
  library(AER)
  library(gmm)
})

d <- read.csv("products.csv", stringsAsFactors = FALSE)
truth <- jsonlite::fromJSON("truth.json")
tp <- truth$parameters

# dependent variable and within-nest share, from the shares only
inside <- ave(d$share, d$market, FUN = sum)
s0 <- 1 - inside
sg <- ave(d$share, d$market, d$segment, FUN = sum)
d$y <- log(d$share) - log(s0)
d$ln_s_jg <- log(d$share / sg)

excluded <- c("z_cost", "n_nest", "nest_sum_x1", "nest_sum_x2", "rival_sum_x1", "rival_sum_x2")
names_x <- c("1", "x1", "x2", "price", "ln_s_jg")
names_z <- c("1", "x1", "x2", excluded)

N <- nrow(d)
X <- cbind(1, d$x1, d$x2, d$price, d$ln_s_jg)
Z <- cbind(1, d$x1, d$x2, as.matrix(d[, excluded]))
y <- d$y
colnames(X) <- names_x
colnames(Z) <- names_z
K <- ncol(X); M <- ncol(Z)

# ---------------------------------------------------------------- (a) 2SLS, AER
fml <- as.formula(paste("y ~ x1 + x2 + price + ln_s_jg |",
                        paste(c("x1", "x2", excluded), collapse = " + ")))
iv <- ivreg(fml, data = d)
tsls_coef <- unname(coef(iv))
tsls_se <- unname(sqrt(diag(vcov(iv))))
tsls_se_hc0 <- unname(sqrt(diag(sandwich::vcovHC(iv, type = "HC0"))))
siv <- summary(iv, diagnostics = TRUE)
diag_tab <- siv$diagnostics

# ---------------------------------------------------------------- (b) two-step GMM by matrix algebra
linear_gmm <- function(W) {
  A <- t(X) %*% Z %*% W %*% t(Z) %*% X
  b <- t(X) %*% Z %*% W %*% t(Z) %*% y
  drop(solve(A, b))
}
S_at <- function(e) crossprod(Z * e) / N                 # (1/N) sum e^2 z z', uncentered
W1 <- solve(crossprod(Z) / N)
b1 <- linear_gmm(W1)
e1 <- drop(y - X %*% b1)
gbar1 <- drop(crossprod(Z, e1)) / N
Q1 <- N * drop(t(gbar1) %*% W1 %*% gbar1)
W2 <- solve(S_at(e1))
b2 <- linear_gmm(W2)
e2 <- drop(y - X %*% b2)
gbar2 <- drop(crossprod(Z, e2)) / N
J <- N * drop(t(gbar2) %*% W2 %*% gbar2)
jdf <- M - K
jp <- pchisq(J, jdf, lower.tail = FALSE)
G <- -crossprod(Z, X) / N
S2 <- S_at(e2)
bread <- solve(t(G) %*% W2 %*% G)
V <- bread %*% t(G) %*% W2 %*% S2 %*% W2 %*% G %*% bread / N
se_sandwich <- sqrt(diag(V))
# efficient form (G'S^-1 G)^-1 / N with S at the step-2 residuals (what gmm reports)
V_eff <- solve(t(G) %*% solve(S2) %*% G) / N
se_efficient <- sqrt(diag(V_eff))
# step 1 (= 2SLS) agrees with AER?
stopifnot(max(abs(b1 - tsls_coef)) < 1e-10)

# ---------------------------------------------------------------- (c) cross-checks with gmm
hfml <- as.formula(paste("~ x1 + x2 +", paste(excluded, collapse = " + ")))
g_two <- gmm(y ~ x1 + x2 + price + ln_s_jg, hfml, data = d, type = "twoStep",
             wmatrix = "optimal", vcov = "MDS", centeredVcov = FALSE)
g_fix <- gmm(y ~ x1 + x2 + price + ln_s_jg, hfml, data = d,
             weightsMatrix = W2, vcov = "MDS", centeredVcov = FALSE)
# a nonlinear moment function with the step-2 weight fixed, optimised by optim (BFGS)
gfun <- function(theta, x) {
  e <- drop(x[, 1] - x[, 2:(K + 1)] %*% theta)
  x[, (K + 2):(K + 1 + M)] * e
}
Gfun <- function(theta, x) -crossprod(x[, (K + 2):(K + 1 + M)], x[, 2:(K + 1)]) / nrow(x)
dat <- cbind(y, X, Z)
g_nl <- gmm(gfun, x = dat, t0 = b1, gradv = Gfun, weightsMatrix = W2, vcov = "MDS",
            centeredVcov = FALSE, method = "BFGS", control = list(reltol = 1e-20, maxit = 10000))
# gmm's J for the twoStep fit (N gbar' S^-1 gbar with S at step-1 residuals)
j_gmm <- unname(specTest(g_two)$test[1, 1])
reldiff <- function(a, b) max(abs(a - b) / pmax(abs(b), 1e-300))

# ---------------------------------------------------------------- (d) elasticities, market 1, truth
m1 <- d[d$market == 1, ]
a <- tp$alpha_price; rho <- tp$rho
sg1 <- ave(m1$share, m1$segment, FUN = sum)
sjg1 <- m1$share / sg1
J1 <- nrow(m1)
E <- matrix(0, J1, J1)
for (j in 1:J1) for (k in 1:J1) {
  if (j == k) {
    E[j, k] <- a * m1$price[j] * (1 / (1 - rho) - rho / (1 - rho) * sjg1[j] - m1$share[j])
  } else if (m1$segment[j] == m1$segment[k]) {
    E[j, k] <- -a * m1$price[k] * (rho / (1 - rho) * sjg1[k] + m1$share[k])
  } else {
    E[j, k] <- -a * m1$price[k] * m1$share[k]
  }
}

# ---------------------------------------------------------------- JSON out, full double precision
num <- function(v) sprintf("%.17g", v)
js <- function(x, ind = "") {
  ind2 <- paste0(ind, " ")
  if (is.list(x)) {
    keys <- names(x)
    parts <- vapply(seq_along(x), function(i)
      paste0(ind2, "\"", keys[i], "\": ", js(x[[i]], ind2)), "")
    return(paste0("{\n", paste(parts, collapse = ",\n"), "\n", ind, "}"))
  }
  if (is.matrix(x)) {
    rows <- vapply(seq_len(nrow(x)), function(i) js(I(x[i, ]), ind2), "")
    return(paste0("[\n", paste(paste0(ind2, rows), collapse = ",\n"), "\n", ind, "]"))
  }
  scalar <- length(x) == 1 && !inherits(x, "AsIs")
  val <- if (is.character(x)) paste0("\"", gsub("\"", "\\\\\"", x), "\"")
         else if (is.logical(x)) tolower(as.character(x))
         else if (is.integer(x)) as.character(x)
         else num(x)
  if (scalar) val else paste0("[", paste(val, collapse = ", "), "]")
}

versions <- list(
  R = R.version.string,
  AER = as.character(packageVersion("AER")),
  gmm = as.character(packageVersion("gmm")),
  sandwich = as.character(packageVersion("sandwich")),
  numpy_scipy_data = paste0("numpy ", truth$versions$numpy, ", scipy ", truth$versions$scipy,
                            " (make_data.py)"))

out <- list(
  source = paste0("Computed by estimate.R in this folder with ", R.version.string,
                  ", AER ", versions$AER, " (ivreg; sandwich ", versions$sandwich,
                  " vcovHC HC0) and gmm ", versions$gmm,
                  " (cross-check), on data drawn by make_data.py from a known nested logit ",
                  "(Berry 1994, RAND J. Econ. 25(2); elasticities as in Verboven 1996)."),
  model = "ln s_j - ln s_0 = x'beta + rho ln s_{j|g} + xi; s_{j|g} = s_j / sum over the products of j's segment in j's market; outside good alone",
  observations = N,
  markets = length(unique(d$market)),
  names = I(names_x),
  instruments = I(names_z),
  excluded = I(excluded),
  endogenous = I(c("price", "ln_s_jg")),
  rho_index = 5L,
  coef = I(b2),
  se = I(se_efficient),
  se_sandwich = I(se_sandwich),
  se_efficient = I(se_efficient),
  se_note = "se = se_efficient (matches R gmm's reported SEs, the same convention as ../automobiles/reference-logit.json); se_sandwich = sqrt diag of (G'WG)^-1 G'WSWG (G'WG)^-1 / N with G = -Z'X/N, W = W2 (S^-1 at the step-1 residuals), S at the step-2 residuals; se_efficient = (G'S^-1 G)^-1/N with S at the step-2 residuals (what R gmm reports)",
  step1_coef = I(b1),
  step1_objective = Q1,
  objective = J,
  j = J,
  j_df = as.integer(jdf),
  j_pvalue = jp,
  weighting = "step 1: W1 = (Z'Z/N)^-1 (= 2SLS); step 2: W2 = S^-1, S = (1/N) sum xi_n^2 z_n z_n' (uncentered) at the step-1 residuals; Q = N gbar'W gbar",
  twosls_coef = I(tsls_coef),
  twosls_se_hc0 = I(tsls_se_hc0),
  twosls_se_usual = I(tsls_se),
  twosls_sargan = unname(diag_tab["Sargan", "statistic"]),
  twosls_weak_instruments_f = I(unname(diag_tab[grep("Weak", rownames(diag_tab)), "statistic"])),
  twosls_note = "AER::ivreg; se_usual = vcov(ivreg) (homoskedastic, sigma^2 with N-K); se_hc0 = sandwich::vcovHC(type='HC0'); weak-instrument F per endogenous regressor (price, ln_s_jg) from summary(diagnostics=TRUE)",
  gmm_package = list(
    twostep_coef = I(unname(coef(g_two))),
    twostep_se = I(unname(sqrt(diag(vcov(g_two))))),
    twostep_j = j_gmm,
    fixed_w2_coef = I(unname(coef(g_fix))),
    nonlinear_bfgs_coef = I(unname(coef(g_nl))),
    max_rel_diff_twostep_vs_matrix = reldiff(unname(coef(g_two)), b2),
    max_rel_diff_fixed_w2_vs_matrix = reldiff(unname(coef(g_fix)), b2),
    max_rel_diff_nonlinear_vs_matrix = reldiff(unname(coef(g_nl)), b2),
    max_rel_diff_se_vs_se_efficient = reldiff(unname(sqrt(diag(vcov(g_two)))), se_efficient),
    rel_diff_j = abs(j_gmm - J) / J,
    settings = "gmm(y ~ x1+x2+price+ln_s_jg, ~ x1+x2+excluded, type='twoStep', wmatrix='optimal', vcov='MDS', centeredVcov=FALSE); the same with weightsMatrix = W2; and a moment function g(theta,x) with its analytic gradient gradv, weightsMatrix = W2, from the 2SLS start, optim BFGS reltol 1e-20"),
  truth = list(
    coef = I(c(tp$beta_const, tp$beta_x1, tp$beta_x2, tp$alpha_price, tp$rho)),
    names = I(names_x),
    all = tp),
  elasticities_market1 = list(
    note = "at the TRUE alpha and rho and the observed market-1 shares and prices; e[j][k] = (ds_j/dp_k) p_k / s_j; rows j, columns k in the order of product",
    formula = "own: alpha p_j (1/(1-rho) - rho/(1-rho) s_{j|g} - s_j); same segment: -alpha p_k (rho/(1-rho) s_{k|g} + s_k); other segment: -alpha p_k s_k (alpha < 0: own negative, cross positive)",
    alpha = a,
    rho = rho,
    product = I(as.integer(m1$product)),
    segment = I(m1$segment),
    firm = I(m1$firm),
    share = I(m1$share),
    share_within_segment = I(sjg1),
    price = I(m1$price),
    matrix = E),
  versions = versions
)
writeLines(js(out), "expected.json")

cat("2SLS coef ", num(tsls_coef), "\n")
cat("GMM coef  ", num(b2), "\n")
cat("GMM se    ", num(se_sandwich), "\n")
cat("J", num(J), "df", jdf, "p", num(jp), "\n")
cat("gmm twoStep rel diff", reldiff(unname(coef(g_two)), b2),
    " fixed W2", reldiff(unname(coef(g_fix)), b2),
    " nonlinear", reldiff(unname(coef(g_nl)), b2), "\n")
cat("gmm J", num(j_gmm), "rel diff", abs(j_gmm - J) / J, "\n")
cat("gmm se vs efficient", reldiff(unname(sqrt(diag(vcov(g_two)))), se_efficient),
    " sandwich vs efficient", reldiff(se_sandwich, se_efficient), "\n")
print(diag_tab)
