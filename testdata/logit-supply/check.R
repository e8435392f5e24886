# Independent R cross-check of expected.json (joint logit demand + log cost GMM).
# Run from this folder, after make_expected.py:  Rscript check.R
# Writes r_crosscheck.json. Needs R base, gmm, numDeriv, jsonlite (to read
# expected.json and truth.json).
#
# 1. The whole two-step estimator redone in R from products.csv alone: the
#    concentrated objective in alpha, stats::optimize, then Newton steps on an
#    analytic derivative (checked against numDeriv); W2 from R's own step-1
#    residuals; sandwich SEs; J.
# 2. gmm::gmm with a moment function g(theta, x) (N x M) over all 7 parameters,
#    weightsMatrix = R's W2, analytic gradv, optim BFGS; started (a) from the
#    step-1 estimate and (b) from the numpy step-2 estimate.
suppressPackageStartupMessages({
  library(gmm)
  library(numDeriv)
})
ex <- jsonlite::fromJSON("expected.json")
tr <- jsonlite::fromJSON("truth.json")

d <- read.csv("products.csv", stringsAsFactors = FALSE)
N <- nrow(d)
s0 <- 1 - ave(d$share, d$market, FUN = sum)
Sf <- ave(d$share, d$market, d$firm, FUN = sum)
y <- log(d$share) - log(s0)
p <- d$price
X1b <- cbind(1, d$x1, d$x2)
Wc <- cbind(1, d$x1, d$w1)
Zd <- cbind(1, d$x1, d$x2, as.matrix(d[, ex$demand_excluded]))
Zs <- cbind(1, d$x1, d$w1, as.matrix(d[, ex$supply_excluded]))
Md <- ncol(Zd); Ms <- ncol(Zs); M <- Md + Ms; K <- 7

eta_of <- function(a) 1 / (-a * (1 - Sf))

# stacked residual vector for theta = (b0, b1, b2, alpha, g0, g1, g2)
resid <- function(th) {
  xi <- y - drop(X1b %*% th[1:3]) - th[4] * p
  om <- log(p - eta_of(th[4])) - drop(Wc %*% th[5:7])
  list(xi = xi, om = om)
}
gfun <- function(th, x) {
  r <- resid(th)
  cbind(Zd * r$xi, Zs * r$om)
}
Gfun <- function(th, x) {
  a <- th[4]; eta <- eta_of(a); cc <- p - eta
  G <- matrix(0, M, K)
  G[1:Md, 1:4] <- -crossprod(Zd, cbind(X1b, p)) / N
  G[(Md + 1):M, 4] <- crossprod(Zs, (eta / a) / cc) / N
  G[(Md + 1):M, 5:7] <- -crossprod(Zs, Wc) / N
  G
}
Qfull <- function(th, W) { gb <- colMeans(gfun(th)); N * drop(t(gb) %*% W %*% gb) }

# concentrated objective: linear parameters by stacked linear IV for given alpha
conc <- function(a, W) {
  cc <- p - eta_of(a)
  ZX <- matrix(0, M, 6)
  ZX[1:Md, 1:3] <- crossprod(Zd, X1b)
  ZX[(Md + 1):M, 4:6] <- crossprod(Zs, Wc)
  ZY <- c(crossprod(Zd, y - a * p), crossprod(Zs, log(cc)))
  lin <- solve(t(ZX) %*% W %*% ZX, t(ZX) %*% W %*% ZY)
  gb <- drop(ZY - ZX %*% lin) / N
  th <- c(lin[1:3], a, lin[4:6])
  list(Q = N * drop(t(gb) %*% W %*% gb), theta = th,
       dQ = 2 * N * drop(t(gb) %*% W %*% Gfun(th)[, 4]))  # envelope theorem
}
amax <- -max(1 / (p * (1 - Sf)))
solve_alpha <- function(W) {
  o <- optimize(function(a) conc(a, W)$Q, c(-6, amax - 1e-6), tol = 1e-12)
  a <- o$minimum
  for (it in 1:30) {
    cq <- conc(a, W)
    if (abs(cq$dQ) < 1e-10) break
    d2 <- numDeriv::grad(function(b) conc(b, W)$dQ, a)
    a <- a - cq$dQ / d2
  }
  cq <- conc(a, W)
  # analytic derivative vs numDeriv (Richardson) of the concentrated Q
  nd <- numDeriv::grad(function(b) conc(b, W)$Q, a + 1e-4)
  an <- conc(a + 1e-4, W)$dQ
  list(a = a, Q = cq$Q, dQ = cq$dQ, theta = cq$theta, optimize_alpha = o$minimum,
       dq_check_rel = abs(nd - an) / abs(an))
}

W1 <- matrix(0, M, M)
W1[1:Md, 1:Md] <- solve(crossprod(Zd) / N)
W1[(Md + 1):M, (Md + 1):M] <- solve(crossprod(Zs) / N)
st1 <- solve_alpha(W1)
g1 <- gfun(st1$theta)
W2 <- solve(crossprod(g1) / N)
st2 <- solve_alpha(W2)
th2 <- st2$theta
g2 <- gfun(th2)
S2 <- crossprod(g2) / N
G <- Gfun(th2)
B <- solve(t(G) %*% W2 %*% G)
V <- B %*% t(G) %*% W2 %*% S2 %*% W2 %*% G %*% B / N
se <- sqrt(diag(V))
J <- st2$Q

# numpy values
th1_np <- c(ex$step1$beta, ex$step1$gamma)
th2_np <- c(ex$beta, ex$gamma)
W2_np <- as.matrix(ex$w2)
rd <- function(a, b) max(abs(a - b) / abs(b))

# gmm package, fixed W2 (R's), all 7 parameters, analytic gradient
ctl <- list(reltol = 1e-20, maxit = 100000)
fit_a <- gmm(gfun, x = as.matrix(d$price), t0 = st1$theta, gradv = Gfun, weightsMatrix = W2,
             vcov = "MDS", centeredVcov = FALSE, optfct = "optim", method = "BFGS", control = ctl)
fit_b <- gmm(gfun, x = as.matrix(d$price), t0 = th2_np, gradv = Gfun, weightsMatrix = W2,
             vcov = "MDS", centeredVcov = FALSE, optfct = "optim", method = "BFGS", control = ctl)
# and nlminb (PORT, default tolerances; smaller rel.tol ends in 'singular
# convergence' at the same point) from the step-1 estimate, numerical gradients
fit_c <- gmm(gfun, x = as.matrix(d$price), t0 = st1$theta, weightsMatrix = W2,
             vcov = "MDS", centeredVcov = FALSE, optfct = "nlminb")

# markups in market 1 at the truth vs the generator's true markups
m1 <- d$market == 1
eta_m1 <- 1 / (-tr$parameters$alpha_price * (1 - Sf[m1]))
tp <- read.csv("truth_products.csv")
mk_true <- tp$markup[tp$market == 1]

num <- function(v) sprintf("%.17g", v)
res <- list(
  source = paste0("check.R: ", R.version.string, ", gmm ", packageVersion("gmm"),
                  ", numDeriv ", packageVersion("numDeriv")),
  r_step1_theta = st1$theta, r_step1_objective = st1$Q, r_step1_dq = st1$dQ,
  r_step1_optimize_alpha = st1$optimize_alpha,
  r_step2_theta = th2, r_step2_objective = J, r_step2_dq = st2$dQ,
  r_se_sandwich = se,
  r_dq_analytic_vs_numderiv_rel = c(st1$dq_check_rel, st2$dq_check_rel),
  rel_diff_step1_theta = rd(st1$theta, th1_np),
  rel_diff_step1_objective = rd(st1$Q, ex$step1$objective),
  rel_diff_w2 = rd(W2, W2_np),
  rel_diff_step2_theta = rd(th2, th2_np),
  rel_diff_j = rd(J, ex$j),
  rel_diff_se_sandwich = rd(se, ex$se_sandwich),
  gmm_from_step1_theta = unname(coef(fit_a)),
  gmm_from_step1_rel_diff = rd(unname(coef(fit_a)), th2_np),
  gmm_from_step1_max_abs_diff = max(abs(unname(coef(fit_a)) - th2_np)),
  gmm_from_step1_convergence = fit_a$algoInfo$convergence,
  gmm_from_numpy_theta = unname(coef(fit_b)),
  gmm_from_numpy_rel_diff = rd(unname(coef(fit_b)), th2_np),
  gmm_nlminb_from_step1_theta = unname(coef(fit_c)),
  gmm_nlminb_from_step1_rel_diff = rd(unname(coef(fit_c)), th2_np),
  gmm_nlminb_from_step1_max_abs_diff = max(abs(unname(coef(fit_c)) - th2_np)),
  gmm_nlminb_message = fit_c$algoInfo$message,
  gmm_objective_times_n_at_numpy = Qfull(th2_np, W2),
  gmm_objective_times_n_at_bfgs = Qfull(unname(coef(fit_a)), W2),
  gmm_objective_times_n_at_nlminb = Qfull(unname(coef(fit_c)), W2),
  markups_market1_truth_rel_diff_vs_expected = rd(eta_m1, ex$markups_market1_truth$markup),
  markups_market1_truth_rel_diff_vs_generator = rd(eta_m1, mk_true)
)
js <- function(x) {
  parts <- vapply(names(x), function(k) {
    v <- x[[k]]
    val <- if (is.character(v)) paste0("\"", v, "\"")
           else if (length(v) == 1) num(v) else paste0("[", paste(num(v), collapse = ", "), "]")
    paste0(" \"", k, "\": ", val)
  }, "")
  paste0("{\n", paste(parts, collapse = ",\n"), "\n}\n")
}
cat(js(res), file = "r_crosscheck.json")
cat(js(res))
