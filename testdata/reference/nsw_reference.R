# Reference values for counterpart's tests, computed with base R and the 'stats' package only
# (no contributed packages). Each formula is restated in a comment beside the code that computes it;
# the Go package causal/ implements the same formulas.
# Run from the repository root:
#   Rscript testdata/reference/nsw_reference.R
# Reads   testdata/nsw_dehejia_wahba.csv
# Reads   testdata/water_audits.csv (section 7, trimming; our own simulated scenario)
# Writes  testdata/reference/nsw_schooling.csv   (NSW data plus a derived string column `schooling`)
#         testdata/reference/separation.csv      (small seeded data set with quasi-complete separation)
#         testdata/reference/nsw_reference.json  (all reference values; numbers printed with 17 significant digits)

stopifnot(file.exists("testdata/nsw_dehejia_wahba.csv"))
out_dir <- Sys.getenv("COUNTERPART_REF_OUT", "testdata/reference")

# ---------------------------------------------------------------------------------------------
# Minimal JSON writer (base R only). Doubles are printed with sprintf("%.17g") so that a reader
# recovers the exact IEEE double. NA / NaN / Inf / NULL become null.
#   - a named list           -> object (keys in list order)
#   - an unnamed list        -> array
#   - a vector wrapped in arr() -> array, even when of length 1
#   - a plain vector of length 1 -> scalar; longer -> array
# ---------------------------------------------------------------------------------------------
arr <- function(x) structure(list(v = x), class = "json_array")
json_str <- function(s) {
  s <- gsub("\\", "\\\\", s, fixed = TRUE)
  s <- gsub("\"", "\\\"", s, fixed = TRUE)
  s <- gsub("\n", "\\n", s, fixed = TRUE)
  s <- gsub("\r", "\\r", s, fixed = TRUE)
  s <- gsub("\t", "\\t", s, fixed = TRUE)
  s <- gsub("<", "\\u003c", s, fixed = TRUE)
  s <- gsub(">", "\\u003e", s, fixed = TRUE)
  s <- gsub("&", "\\u0026", s, fixed = TRUE)
  paste0("\"", s, "\"")
}
json_atom <- function(v) {
  if (is.null(v) || (length(v) == 1 && is.na(v))) return("null")
  if (is.logical(v)) return(if (v) "true" else "false")
  if (is.character(v)) return(json_str(v))
  if (is.numeric(v)) {
    if (!is.finite(v)) return("null")
    if (is.integer(v)) return(sprintf("%d", v))
    return(sprintf("%.17g", v))
  }
  stop("json: unsupported type ", class(v))
}
to_json <- function(x, indent = 0) {
  pad <- strrep("  ", indent)
  pad1 <- strrep("  ", indent + 1)
  if (is.null(x)) return("null")
  if (inherits(x, "json_array")) {
    v <- x$v
    if (length(v) == 0) return("[]")
    return(paste0("[", paste(vapply(seq_along(v), function(i) json_atom(v[[i]]), ""), collapse = ", "), "]"))
  }
  if (is.list(x)) {
    if (length(x) == 0) return(if (is.null(names(x))) "[]" else "{}")
    items <- vapply(seq_along(x), function(i) to_json(x[[i]], indent + 1), "")
    if (!is.null(names(x))) {
      items <- paste0(json_str(names(x)), ": ", items)
      return(paste0("{\n", paste0(pad1, items, collapse = ",\n"), "\n", pad, "}"))
    }
    return(paste0("[\n", paste0(pad1, items, collapse = ",\n"), "\n", pad, "]"))
  }
  if (length(x) == 1) return(json_atom(x))
  to_json(arr(x), indent)
}

# ---------------------------------------------------------------------------------------------
# Data
# ---------------------------------------------------------------------------------------------
d <- read.csv("testdata/nsw_dehejia_wahba.csv")
stopifnot(nrow(d) == 445)
covs <- c("age", "educ", "black", "hisp", "married", "nodegr", "re74", "re75")
Tr <- d$treat
y <- d$re78
n <- nrow(d)
n1 <- sum(Tr)
n0 <- n - n1

# ---------------------------------------------------------------------------------------------
# 1. Difference in means: ybar1 - ybar0, SE = sqrt(s1^2/n1 + s0^2/n0) (unpooled variances, n_a - 1)
# ---------------------------------------------------------------------------------------------
dim_value <- mean(y[Tr == 1]) - mean(y[Tr == 0])
dim_se <- sqrt(var(y[Tr == 1]) / n1 + var(y[Tr == 0]) / n0)

# ---------------------------------------------------------------------------------------------
# 2. Logistic propensity model, maximum likelihood (glm IRLS, default control)
# ---------------------------------------------------------------------------------------------
fml <- treat ~ age + educ + black + hisp + married + nodegr + re74 + re75
fit <- glm(fml, family = binomial, data = d)
stopifnot(fit$converged)
cf <- summary(fit)$coefficients
terms <- c("(intercept)", covs)
stopifnot(identical(rownames(cf)[-1], covs))
e <- as.numeric(fitted(fit))
X <- model.matrix(fml, data = d)           # n x p, first column intercept
p <- ncol(X)

# AUC (c-statistic) by the Mann-Whitney rank formula, ties counted 1/2 via mid-ranks:
#   AUC = (sum of ranks of treated scores - n1 (n1 + 1) / 2) / (n1 n0)
rk <- rank(e, ties.method = "average")
auc <- (sum(rk[Tr == 1]) - n1 * (n1 + 1) / 2) / (n1 * n0)
# cross-check with wilcox.test's W statistic
W <- suppressWarnings(wilcox.test(e[Tr == 1], e[Tr == 0], exact = FALSE)$statistic)
stopifnot(abs(W / (n1 * n0) - auc) < 1e-12)

# ---------------------------------------------------------------------------------------------
# 3. Balance
#   binary (only 0/1):  SMD = (p1 - p0) / sqrt((p1(1-p1) + p0(1-p0))/2)
#   otherwise:          SMD = (m1 - m0) / sqrt((s1^2 + s0^2)/2)
#   weighted:           m_a = sum w x / sum w; the denominator stays the UNWEIGHTED one above, before and
#                       after weighting, so that a change of the SMD reflects the means only (Rosenbaum &
#                       Rubin 1985; Stuart 2010). The option with weighted arm variances (Austin & Stuart
#                       2015) is balance_weighted_ate_weighted_sd:
#                       s_a^2 = sum w (x - m_a)^2 / (sum w - sum w^2 / sum w)
#                       (all w = 1 gives the n_a - 1 sample variance)
#   variance ratio = s1^2 / s0^2 (null for binary columns)
#   KS = ks.test(x[treat==1], x[treat==0])$statistic (unweighted only)
# ---------------------------------------------------------------------------------------------
is_binary <- function(x) all(x %in% c(0, 1))
wmean <- function(x, w) sum(w * x) / sum(w)
wvar <- function(x, w) { m <- wmean(x, w); sum(w * (x - m)^2) / (sum(w) - sum(w^2) / sum(w)) }
smd_w <- function(x, w, weighted_sd = TRUE) {
  x1 <- x[Tr == 1]; w1 <- w[Tr == 1]; x0 <- x[Tr == 0]; w0 <- w[Tr == 0]
  m1 <- wmean(x1, w1); m0 <- wmean(x0, w0)
  # the arms' spread: weighted (Austin & Stuart 2015) or unweighted (w = 1)
  sw1 <- if (weighted_sd) w1 else rep(1, length(x1)); sw0 <- if (weighted_sd) w0 else rep(1, length(x0))
  if (is_binary(x)) {
    p1 <- wmean(x1, sw1); p0 <- wmean(x0, sw0)
    smd <- (m1 - m0) / sqrt((p1 * (1 - p1) + p0 * (1 - p0)) / 2)
    vr <- NA
  } else {
    v1 <- wvar(x1, sw1); v0 <- wvar(x0, sw0)
    smd <- (m1 - m0) / sqrt((v1 + v0) / 2)
    vr <- wvar(x1, w1) / wvar(x0, w0)
  }
  list(smd = smd, variance_ratio = vr, mean_treated = m1, mean_control = m0)
}

ones <- rep(1, n)
balance <- list()
for (v in covs) {
  x <- d[[v]]
  b <- smd_w(x, ones)
  # sanity: with unit weights the variance is the usual sample variance
  if (!is_binary(x)) stopifnot(abs(b$variance_ratio - var(x[Tr == 1]) / var(x[Tr == 0])) < 1e-12)
  ks <- suppressWarnings(ks.test(x[Tr == 1], x[Tr == 0], exact = FALSE)$statistic)
  balance[[v]] <- list(smd = b$smd, variance_ratio = b$variance_ratio, ks = unname(ks),
                       mean_treated = b$mean_treated, mean_control = b$mean_control)
}

w_ate <- Tr / e + (1 - Tr) / (1 - e)
w_att <- Tr + (1 - Tr) * e / (1 - e)
w_ato <- Tr * (1 - e) + (1 - Tr) * e
weighted_balance <- function(w, weighted_sd = FALSE) {
  res <- list()
  for (v in covs) {
    b <- smd_w(d[[v]], w, weighted_sd)
    res[[v]] <- list(smd = b$smd, mean_treated = b$mean_treated, mean_control = b$mean_control)
  }
  res
}
balance_weighted_ate <- weighted_balance(w_ate)
balance_weighted_ato <- weighted_balance(w_ato)
balance_weighted_ate_weighted_sd <- weighted_balance(w_ate, weighted_sd = TRUE)
# with unit weights both denominators are the unweighted one
stopifnot(all(vapply(covs, function(v) abs(smd_w(d[[v]], ones, TRUE)$smd - smd_w(d[[v]], ones, FALSE)$smd) < 1e-15, TRUE)))
kish <- function(w) sum(w)^2 / sum(w^2)
ess <- list()
for (nm in c("ate", "att", "ato")) {
  w <- switch(nm, ate = w_ate, att = w_att, ato = w_ato)
  ess[[nm]] <- list(treated = kish(w[Tr == 1]), control = kish(w[Tr == 0]))
}

# ---------------------------------------------------------------------------------------------
# 4. Categorical covariate: schooling derived from educ; reference level = most frequent level
# ---------------------------------------------------------------------------------------------
ds <- d
ds$schooling <- ifelse(d$educ <= 8, "primary",
                ifelse(d$educ <= 11, "some_high",
                ifelse(d$educ == 12, "high_school", "beyond")))
write.csv(ds, file.path(out_dir, "nsw_schooling.csv"), row.names = FALSE)
# check that the written file reads back identically (no precision lost in write.csv)
rb <- read.csv(file.path(out_dir, "nsw_schooling.csv"))
stopifnot(isTRUE(all.equal(rb, ds, tolerance = 0)))
tab <- table(ds$schooling)
ref_level <- names(tab)[which.max(tab)]
stopifnot(sum(tab == max(tab)) == 1)       # the most frequent level is unique
ds$schooling <- relevel(factor(ds$schooling), ref = ref_level)
fit_cat <- glm(treat ~ age + schooling + black + re75, family = binomial, data = ds)
stopifnot(fit_cat$converged)
cfc <- summary(fit_cat)$coefficients
cat_terms <- rownames(cfc)
cat_terms[1] <- "(intercept)"
cat_terms <- sub("^schooling", "schooling=", cat_terms)

# ---------------------------------------------------------------------------------------------
# 5. Estimators
# ---------------------------------------------------------------------------------------------
ofml <- re78 ~ age + educ + black + hisp + married + nodegr + re74 + re75
f1 <- lm(ofml, data = d[Tr == 1, ])
f0 <- lm(ofml, data = d[Tr == 0, ])
b1 <- coef(f1); b0 <- coef(f0)
V1 <- vcov(f1); V0 <- vcov(f0)
stopifnot(identical(colnames(X), names(b1)))
m1hat <- as.numeric(X %*% b1)              # f1(x_i), all units
m0hat <- as.numeric(X %*% b0)              # f0(x_i), all units

estimates <- list()
add_est <- function(estimator, estimand, value, se, se_method) {
  estimates[[length(estimates) + 1]] <<- list(estimator = estimator, estimand = estimand,
                                               value = value, se = se, se_method = se_method)
}
add_est("difference_in_means", "ATE", dim_value, dim_se, "unpooled variances")

# Regression adjustment. Target set U (all / treated / controls), m = |U|:
#   tau = mean_{i in U} [f1(x_i) - f0(x_i)] = xbar' (b1 - b0)
#   Var = xbar' (V1 + V0) xbar + (b1 - b0)' S (b1 - b0) / m,  S = cov(X[U, ]) (n - 1 form)
reg_adj <- function(idx, V1 = vcov(f1), V0 = vcov(f0)) {
  XU <- X[idx, , drop = FALSE]
  xbar <- colMeans(XU)
  db <- b1 - b0
  tau <- mean(m1hat[idx] - m0hat[idx])
  stopifnot(abs(tau - sum(xbar * db)) < 1e-8 * max(1, abs(tau)))
  S <- cov(XU)
  v <- as.numeric(t(xbar) %*% (V1 + V0) %*% xbar + t(db) %*% S %*% db / nrow(XU))
  c(tau, sqrt(v))
}
ra <- reg_adj(seq_len(n));  add_est("regression_adjustment", "ATE", ra[1], ra[2], "delta method")
ra <- reg_adj(which(Tr == 1)); add_est("regression_adjustment", "ATT", ra[1], ra[2], "delta method")
ra <- reg_adj(which(Tr == 0)); add_est("regression_adjustment", "ATC", ra[1], ra[2], "delta method")

# Heteroskedasticity-robust (sandwich) covariances of the arm models, by formula (no contributed package):
#   V_a = (X'X)^{-1} (sum_i omega_i x_i x_i') (X'X)^{-1} over the arm's units, r_i the lm residual,
#   h_i = x_i'(X'X)^{-1} x_i (hatvalues), k = number of coefficients, n_a units:
#   HC0 omega = r^2 (White 1980); HC1 omega = r^2 n_a / (n_a - k); HC3 omega = r^2 / (1 - h)^2
#   (MacKinnon & White 1985). The regression-adjustment SE then uses V_a in the same delta-method formula.
hc_vcov <- function(f, type) {
  Xa <- model.matrix(f); r <- as.numeric(resid(f)); h <- as.numeric(hatvalues(f)); na <- nrow(Xa); k <- ncol(Xa)
  stopifnot(max(abs(h - rowSums((Xa %*% solve(crossprod(Xa))) * Xa))) < 1e-10)
  omega <- switch(type, HC0 = r^2, HC1 = r^2 * na / (na - k), HC3 = r^2 / (1 - h)^2)
  Bi <- solve(crossprod(Xa))
  Bi %*% crossprod(Xa * omega, Xa) %*% Bi
}
regression_adjustment_hc <- list()
for (type in c("HC0", "HC1", "HC3")) {
  V1h <- hc_vcov(f1, type); V0h <- hc_vcov(f0, type)
  for (tg in c("ATE", "ATT", "ATC")) {
    idx <- switch(tg, ATE = seq_len(n), ATT = which(Tr == 1), ATC = which(Tr == 0))
    ra <- reg_adj(idx, V1h, V0h)
    regression_adjustment_hc[[length(regression_adjustment_hc) + 1]] <- list(estimand = tg, covariance = type, value = ra[1], se = ra[2])
  }
}

# ---- Stacked M-estimation sandwich for the weighting estimators ------------------------------
# theta = (beta (p), mu1, mu0). g_i(theta) = [ x_i (T_i - e_i) ; g1_i ; g0_i ],  e_i = plogis(x_i' beta).
# A = -(1/n) sum_i d g_i / d theta',  B = (1/n) sum_i g_i g_i',  V = A^{-1} B A^{-T} / n.
# tau = mu1 - mu0,  Var(tau) = V[mu1,mu1] + V[mu0,mu0] - 2 V[mu1,mu0].
# Derivatives used (with de/dbeta = e (1 - e) x):
#   d/dbeta [x (T - e)]      = - e (1 - e) x x'
#   d/dbeta [1/e]            = - (1 - e)/e x
#   d/dbeta [1/(1 - e)]      =   e/(1 - e) x
#   d/dbeta [1 - e]          = - e (1 - e) x
#   d/dbeta [e]              =   e (1 - e) x
#   d/dbeta [e/(1 - e)]      =   e/(1 - e) x          (the odds exp(x'beta))
# The score block does not depend on mu1, mu0, so A[beta, mu] = 0; A is block lower triangular.
#
# Each weighting estimator supplies, per unit i:
#   g1, g0                 the two estimator equations at the solution
#   dg1_db, dg0_db         n x p matrices: row i = d g1_i / d beta'  (resp. g0)
#   dg1_dmu1, dg0_dmu0     length-n vectors (d g1/d mu0 = d g0/d mu1 = 0 for all forms used here)
#
# gfun(beta, mu1, mu0) returns the n x 2 matrix (g1, g0) at any theta; it is used only to check the
# analytic derivatives against central finite differences (relative agreement 1e-5 required).
beta_hat <- coef(fit)
check_derivatives <- function(gfun, mu1, mu0, dg1_db, dg0_db, dg1_dmu1, dg0_dmu0) {
  an <- rbind(c(colSums(dg1_db), sum(dg1_dmu1), 0), c(colSums(dg0_db), 0, sum(dg0_dmu0)))
  th <- c(beta_hat, mu1, mu0)
  G <- function(t) colSums(gfun(t[1:p], t[p + 1], t[p + 2]))
  nu <- matrix(0, 2, p + 2)
  for (j in seq_len(p + 2)) {
    h <- 1e-5 * max(abs(th[j]), 1e-3)
    tp <- th; tm <- th; tp[j] <- tp[j] + h; tm[j] <- tm[j] - h
    nu[, j] <- (G(tp) - G(tm)) / (2 * h)
  }
  scale <- pmax(abs(an), abs(nu), 1e-8 * max(abs(an)))
  stopifnot(max(abs(an - nu) / scale) < 1e-5)
}
sandwich_se <- function(g1, g0, dg1_db, dg0_db, dg1_dmu1, dg0_dmu0, gfun, mu1, mu0) {
  check_derivatives(gfun, mu1, mu0, dg1_db, dg0_db, dg1_dmu1, dg0_dmu0)
  stopifnot(max(abs(gfun(beta_hat, mu1, mu0) - cbind(g1, g0))) < 1e-6)
  k <- p + 2
  score <- X * (Tr - e)                               # n x p
  stopifnot(max(abs(colSums(score))) < 1e-6)          # beta is at the ML solution
  stopifnot(abs(sum(g1)) < 1e-6 * n * max(1, abs(mean(y))), abs(sum(g0)) < 1e-6 * n * max(1, abs(mean(y))))
  G <- cbind(score, g1, g0)                           # n x k
  B <- crossprod(G) / n
  A <- matrix(0, k, k)
  A[1:p, 1:p] <- crossprod(X * (e * (1 - e)), X) / n  # -(1/n) sum d score / d beta'
  A[p + 1, 1:p] <- -colSums(dg1_db) / n
  A[p + 2, 1:p] <- -colSums(dg0_db) / n
  A[p + 1, p + 1] <- -sum(dg1_dmu1) / n
  A[p + 2, p + 2] <- -sum(dg0_dmu0) / n
  Ai <- solve(A)
  V <- Ai %*% B %*% t(Ai) / n
  sqrt(V[p + 1, p + 1] + V[p + 2, p + 2] - 2 * V[p + 1, p + 2])
}

# ipw (Horvitz-Thompson) ATE: tau = (1/n) sum [T y/e - (1-T) y/(1-e)]
#   g1 = T y / e - mu1             dg1/dbeta = - T y (1-e)/e x      dg1/dmu1 = -1
#   g0 = (1-T) y / (1-e) - mu0     dg0/dbeta =   (1-T) y e/(1-e) x  dg0/dmu0 = -1
mu1 <- mean(Tr * y / e); mu0 <- mean((1 - Tr) * y / (1 - e))
se <- sandwich_se(g1 = Tr * y / e - mu1, g0 = (1 - Tr) * y / (1 - e) - mu0,
                  dg1_db = X * (-Tr * y * (1 - e) / e), dg0_db = X * ((1 - Tr) * y * e / (1 - e)),
                  dg1_dmu1 = rep(-1, n), dg0_dmu0 = rep(-1, n),
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * y / ee - m1, (1 - Tr) * y / (1 - ee) - m0) },
                  mu1 = mu1, mu0 = mu0)
add_est("ipw", "ATE", mu1 - mu0, se, "sandwich")

# ipw (Horvitz-Thompson) ATT: tau = (1/n1) sum [T y - (1-T) y e/(1-e)]
# A direct stacked form (one equation per mean, with a T multiplier on mu0):
#   g1 = T (y - mu1)                   (mu1 = ybar1)      dg1/dbeta = 0                      dg1/dmu1 = -T
#   g0 = (1-T) y e/(1-e) - T mu0       (mu0 = sum((1-T) y e/(1-e)) / n1)
#                                                         dg0/dbeta = (1-T) y e/(1-e) x      dg0/dmu0 = -T
# Solving sum g1 = sum g0 = 0 gives mu1 - mu0 = tau exactly; the T multiplier on mu0 makes the
# randomness of n1 part of the equation (no separate equation for P(T = 1) is needed).
mu1 <- sum(Tr * y) / n1; mu0 <- sum((1 - Tr) * y * e / (1 - e)) / n1
ipw_att <- mu1 - mu0
stopifnot(abs(ipw_att - sum(Tr * y - (1 - Tr) * y * e / (1 - e)) / n1) < 1e-8)
se <- sandwich_se(g1 = Tr * (y - mu1), g0 = (1 - Tr) * y * e / (1 - e) - Tr * mu0,
                  dg1_db = X * 0, dg0_db = X * ((1 - Tr) * y * e / (1 - e)),
                  dg1_dmu1 = -Tr, dg0_dmu0 = -Tr,
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * (y - m1), (1 - Tr) * y * ee / (1 - ee) - Tr * m0) },
                  mu1 = mu1, mu0 = mu0)
add_est("ipw", "ATT", ipw_att, se, "sandwich")

# ipw_normalized (Hajek) ATE: tau = sum(T y/e)/sum(T/e) - sum((1-T) y/(1-e))/sum((1-T)/(1-e))
#   g1 = T (y - mu1)/e             dg1/dbeta = - T (y - mu1)(1-e)/e x      dg1/dmu1 = -T/e
#   g0 = (1-T)(y - mu0)/(1-e)      dg0/dbeta =   (1-T)(y - mu0) e/(1-e) x  dg0/dmu0 = -(1-T)/(1-e)
mu1 <- sum(Tr * y / e) / sum(Tr / e); mu0 <- sum((1 - Tr) * y / (1 - e)) / sum((1 - Tr) / (1 - e))
se <- sandwich_se(g1 = Tr * (y - mu1) / e, g0 = (1 - Tr) * (y - mu0) / (1 - e),
                  dg1_db = X * (-Tr * (y - mu1) * (1 - e) / e), dg0_db = X * ((1 - Tr) * (y - mu0) * e / (1 - e)),
                  dg1_dmu1 = -Tr / e, dg0_dmu0 = -(1 - Tr) / (1 - e),
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * (y - m1) / ee, (1 - Tr) * (y - m0) / (1 - ee)) },
                  mu1 = mu1, mu0 = mu0)
add_est("ipw_normalized", "ATE", mu1 - mu0, se, "sandwich")

# ipw_normalized (Hajek) ATT: tau = ybar1 - sum((1-T) y e/(1-e)) / sum((1-T) e/(1-e))
#   g1 = T (y - mu1)                   dg1/dbeta = 0                             dg1/dmu1 = -T
#   g0 = (1-T) e/(1-e) (y - mu0)       dg0/dbeta = (1-T) e/(1-e) (y - mu0) x     dg0/dmu0 = -(1-T) e/(1-e)
mu1 <- mean(y[Tr == 1]); mu0 <- sum((1 - Tr) * y * e / (1 - e)) / sum((1 - Tr) * e / (1 - e))
se <- sandwich_se(g1 = Tr * (y - mu1), g0 = (1 - Tr) * e / (1 - e) * (y - mu0),
                  dg1_db = X * 0, dg0_db = X * ((1 - Tr) * e / (1 - e) * (y - mu0)),
                  dg1_dmu1 = -Tr, dg0_dmu0 = -(1 - Tr) * e / (1 - e),
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * (y - m1), (1 - Tr) * ee / (1 - ee) * (y - m0)) },
                  mu1 = mu1, mu0 = mu0)
add_est("ipw_normalized", "ATT", mu1 - mu0, se, "sandwich")

# aipw ATE: phi_i = f1(x_i) - f0(x_i) + T (y - f1)/e - (1-T)(y - f0)/(1-e); tau = mean(phi)
#   SE = sqrt(sum (phi_i - tau)^2) / n   (influence function)
phi <- m1hat - m0hat + Tr * (y - m1hat) / e - (1 - Tr) * (y - m0hat) / (1 - e)
aipw_ate <- mean(phi)
add_est("aipw", "ATE", aipw_ate, sqrt(sum((phi - aipw_ate)^2)) / n, "influence function")

# aipw ATT: tau = sum [T (y - f0) - (1-T) e/(1-e) (y - f0)] / n1
#   psi_i = (T (y - f0 - tau) - (1-T) e/(1-e) (y - f0)) / (n1/n);  SE = sqrt(sum psi_i^2) / n
r0 <- y - m0hat
aipw_att <- sum(Tr * r0 - (1 - Tr) * e / (1 - e) * r0) / n1
psi <- (Tr * (r0 - aipw_att) - (1 - Tr) * e / (1 - e) * r0) / (n1 / n)
stopifnot(abs(mean(psi)) < 1e-6)
add_est("aipw", "ATT", aipw_att, sqrt(sum(psi^2)) / n, "influence function")

# overlap_weighted ATO: tau = sum(T (1-e) y)/sum(T (1-e)) - sum((1-T) e y)/sum((1-T) e)
#   g1 = T (1-e)(y - mu1)          dg1/dbeta = - T e (1-e)(y - mu1) x      dg1/dmu1 = -T (1-e)
#   g0 = (1-T) e (y - mu0)         dg0/dbeta =   (1-T) e (1-e)(y - mu0) x  dg0/dmu0 = -(1-T) e
mu1 <- sum(Tr * (1 - e) * y) / sum(Tr * (1 - e)); mu0 <- sum((1 - Tr) * e * y) / sum((1 - Tr) * e)
se <- sandwich_se(g1 = Tr * (1 - e) * (y - mu1), g0 = (1 - Tr) * e * (y - mu0),
                  dg1_db = X * (-Tr * e * (1 - e) * (y - mu1)), dg0_db = X * ((1 - Tr) * e * (1 - e) * (y - mu0)),
                  dg1_dmu1 = -Tr * (1 - e), dg0_dmu0 = -(1 - Tr) * e,
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * (1 - ee) * (y - m1), (1 - Tr) * ee * (y - m0)) },
                  mu1 = mu1, mu0 = mu0)
add_est("overlap_weighted", "ATO", mu1 - mu0, se, "sandwich")

# ---------------------------------------------------------------------------------------------
# 6. Quasi-complete separation (every gate == 1 unit is treated): glm returns a "converged" fit with a huge
#    coefficient and SE on gate and reports no error (with the default tolerance not even a warning)
# ---------------------------------------------------------------------------------------------
set.seed(1)
ns <- 200
x1 <- round(rnorm(ns), 6)                  # rounded so the CSV holds exactly the values fitted
gate <- sample(rep(c(0, 1), each = ns / 2))
treat_s <- rbinom(ns, 1, plogis(0.5 * x1))
treat_s[gate == 1] <- 1
sep <- data.frame(x1 = x1, gate = gate, treat = treat_s)
write.csv(sep, file.path(out_dir, "separation.csv"), row.names = FALSE)
stopifnot(isTRUE(all.equal(read.csv(file.path(out_dir, "separation.csv")), sep, tolerance = 0)))
# glm's warning "fitted probabilities numerically 0 or 1 occurred" fires only when some fitted value is
# within 10 * .Machine$double.eps of 0 or 1. With the default control (epsilon = 1e-8) IRLS stops first
# (fitted values of the gate == 1 units about 1 - 6e-9): no warning at all, converged = TRUE, and a large
# coefficient with a huge SE on gate. With a tighter tolerance the coefficient keeps growing and the
# warning appears. Both fits are recorded: the gate coefficient depends on the stopping rule and is not
# a reference value; only its scale (and the fact that glm reports no error) is.
fit_sep_capture <- function(control) {
  warns <- character(0)
  f <- withCallingHandlers(
    glm(treat ~ x1 + gate, family = binomial, data = sep, control = control),
    warning = function(w) {
      warns <<- c(warns, conditionMessage(w))
      invokeRestart("muffleWarning")
    })
  cfs <- summary(f)$coefficients
  list(epsilon = control$epsilon, maxit = control$maxit,
       warnings = arr(warns),
       warned_fitted_0_or_1 = any(grepl("fitted probabilities numerically 0 or 1 occurred", warns, fixed = TRUE)),
       converged = f$converged, iterations = f$iter,
       coef = arr(unname(cfs[, 1])), se = arr(unname(cfs[, 2])),
       deviance = f$deviance,
       max_fitted_gate_0 = max(fitted(f)[gate == 0]),
       one_minus_min_fitted_gate_1 = 1 - min(fitted(f)[gate == 1]))
}
sep_default <- fit_sep_capture(glm.control())
sep_tight <- fit_sep_capture(glm.control(epsilon = 1e-12, maxit = 100))
# The finite part of the limit: intercept and x1 equal the fit of treat ~ x1 on the gate == 0 units
# (the gate == 1 units are fitted perfectly in the limit and drop out of the likelihood).
fit_sub <- glm(treat ~ x1, family = binomial, data = sep[sep$gate == 0, ])
cfsub <- summary(fit_sub)$coefficients
sep_terms <- c("(intercept)", "x1", "gate")

# ---------------------------------------------------------------------------------------------
# 7. Trimming by propensity scores, on the simulated water-audit scenario (testdata/water_audits.csv,
#    our own seeded scenario; see testdata/README.md), where scores reach 0.99 and trimming matters.
#    Model without `district` (whose harbour level is never audited: separation, not needed here).
#    pool is a factor with reference level "no", the most frequent level (as the Go code chooses).
# ---------------------------------------------------------------------------------------------
wa <- read.csv("testdata/water_audits.csv", stringsAsFactors = FALSE)
stopifnot(nrow(wa) == 4000, sum(wa$pool == "no") > sum(wa$pool == "yes"))
wa$treat <- as.numeric(wa$audit == "yes")
wa$pool <- factor(wa$pool, levels = c("no", "yes"))
wcovs <- c("household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
wfml <- treat ~ household_size + lot_m2 + home_age + pool + last_summer_lpd
wofml <- litres_per_day ~ household_size + lot_m2 + home_age + pool + last_summer_lpd
# A tight tolerance so the fitted scores are the maximum-likelihood ones to ~1e-13.
wctl <- glm.control(epsilon = 1e-14, maxit = 100)
wfit <- glm(wfml, family = binomial, data = wa, control = wctl)
stopifnot(wfit$converged)
ew <- as.numeric(fitted(wfit))
Tw <- wa$treat

# Crump, Hotz, Imbens & Mitnik (2009): gamma = 1/(e(1-e)). No trimming if max gamma <= 2 mean gamma;
# otherwise alpha = 1/2 - sqrt(1/4 - 1/c) where c solves c = 2 E[gamma | gamma <= c]. Empirically, with the
# gammas sorted and m_k the mean of the k smallest, the right side is 2 m_k on [g_(k), g_(k+1)), so the
# root is c = 2 m_k for the k with g_(k) <= 2 m_k < g_(k+1). It is checked to be unique here and to be
# the k that minimises (sum of the k smallest gammas) / k^2, the empirical asymptotic variance
# E[gamma 1(gamma <= c)] / P(gamma <= c)^2 whose first-order condition the equation is.
crump <- function(e) {
  g <- 1 / (e * (1 - e))
  if (max(g) <= 2 * mean(g)) return(list(alpha = 0, c = Inf, k = length(g)))
  gs <- sort(g)
  k <- seq_along(gs)
  m <- cumsum(gs) / k
  roots <- which(gs <= 2 * m & c(gs[-1], Inf) > 2 * m)
  stopifnot(length(roots) == 1, which.min(cumsum(gs) / k^2) == roots)
  cc <- 2 * m[roots]
  list(alpha = 0.5 - sqrt(0.25 - 1 / cc), c = cc, k = roots)
}
cr <- crump(ew)
stopifnot(cr$alpha > 0)
cr_nsw <- crump(e)                          # the randomised NSW sample: no trimming advised
stopifnot(cr_nsw$alpha == 0)
kept_counts <- function(keep) list(kept_treated = sum(keep & Tw == 1), kept_control = sum(keep & Tw == 0))

# Sturmer, Rothman, Avorn & Glynn (2010): keep e >= q_lo of the treated scores and e <= q_hi of the
# control scores; quantiles of type 7 (R's default, linear interpolation).
q5 <- unname(quantile(ew[Tw == 1], 0.05, type = 7))
q95 <- unname(quantile(ew[Tw == 0], 0.95, type = 7))
keep_pct <- ew >= q5 & ew <= q95

# Symmetric trimming at alpha = 0.1 (keep 0.1 <= e <= 0.9), then everything refitted on the kept units:
# propensity glm, outcome lm per arm, and the estimators of section 5 with the same formulas, the
# sandwich here built as the explicit stacked matrices A and B (no shortcut).
keep10 <- ew >= 0.1 & ew <= 0.9
wk <- wa[keep10, ]
fk <- glm(wfml, family = binomial, data = wk, control = wctl)
stopifnot(fk$converged)
ek <- as.numeric(fitted(fk))
Tk <- wk$treat; yk <- wk$litres_per_day; Xk <- model.matrix(wfml, data = wk); nk <- nrow(wk); pk <- ncol(Xk)
stacked_se <- function(g1, g0, c1, c0, b1, b0) {
  # g = [x (T - e); g1; g0]; dg1/dbeta = c1 x, dg1/dmu1 = -b1 (likewise for g0).
  G <- cbind(Xk * (Tk - ek), g1, g0)
  B <- crossprod(G) / nk
  A <- matrix(0, pk + 2, pk + 2)
  A[1:pk, 1:pk] <- crossprod(Xk * (ek * (1 - ek)), Xk) / nk
  A[pk + 1, 1:pk] <- -colSums(Xk * c1) / nk
  A[pk + 2, 1:pk] <- -colSums(Xk * c0) / nk
  A[pk + 1, pk + 1] <- sum(b1) / nk
  A[pk + 2, pk + 2] <- sum(b0) / nk
  V <- solve(A) %*% B %*% t(solve(A)) / nk
  sqrt(V[pk + 1, pk + 1] + V[pk + 2, pk + 2] - 2 * V[pk + 1, pk + 2])
}
trim_est <- list()
add_trim <- function(estimator, estimand, value, se, se_method)
  trim_est[[length(trim_est) + 1]] <<- list(estimator = estimator, estimand = estimand, value = value, se = se, se_method = se_method)
# ipw_normalized ATE
a1 <- Tk / ek; a0 <- (1 - Tk) / (1 - ek)
mu1 <- sum(a1 * yk) / sum(a1); mu0 <- sum(a0 * yk) / sum(a0)
add_trim("ipw_normalized", "ATE", mu1 - mu0,
         stacked_se(a1 * (yk - mu1), a0 * (yk - mu0), -Tk * (yk - mu1) * (1 - ek) / ek, (1 - Tk) * (yk - mu0) * ek / (1 - ek), a1, a0),
         "sandwich")
# overlap_weighted ATO
a1 <- Tk * (1 - ek); a0 <- (1 - Tk) * ek
mu1 <- sum(a1 * yk) / sum(a1); mu0 <- sum(a0 * yk) / sum(a0)
add_trim("overlap_weighted", "ATO", mu1 - mu0,
         stacked_se(a1 * (yk - mu1), a0 * (yk - mu0), -Tk * ek * (1 - ek) * (yk - mu1), (1 - Tk) * ek * (1 - ek) * (yk - mu0), a1, a0),
         "sandwich")
# aipw ATE and regression adjustment ATE
g1k <- lm(wofml, data = wk[Tk == 1, ]); g0k <- lm(wofml, data = wk[Tk == 0, ])
m1k <- as.numeric(Xk %*% coef(g1k)); m0k <- as.numeric(Xk %*% coef(g0k))
phik <- m1k - m0k + Tk * (yk - m1k) / ek - (1 - Tk) * (yk - m0k) / (1 - ek)
add_trim("aipw", "ATE", mean(phik), sqrt(sum((phik - mean(phik))^2)) / nk, "influence function")
xbk <- colMeans(Xk); dbk <- coef(g1k) - coef(g0k)
add_trim("regression_adjustment", "ATE", sum(xbk * dbk),
         sqrt(as.numeric(t(xbk) %*% (vcov(g1k) + vcov(g0k)) %*% xbk + t(dbk) %*% cov(Xk) %*% dbk / nk)), "delta method")

# ---------------------------------------------------------------------------------------------
# 8. The ATC (average effect on the controls, m = n0 units) of the weighting and doubly robust
#    estimators on the NSW data, written directly with the original T and e (no exchange of the arms),
#    and the difference in means for the ATT and ATC (the same unadjusted contrast as for the ATE).
#    Uses e, X, beta_hat, m1hat, m0hat and sandwich_se of sections 2 and 5, unchanged.
#    Extra derivative used (the inverse odds (1-e)/e = exp(-x'beta)):
#      d/dbeta [(1 - e)/e]   = - (1 - e)/e x
# ---------------------------------------------------------------------------------------------
estimates_more <- list()
add_more <- function(estimator, estimand, value, se, se_method, mu1, mu0) {
  estimates_more[[length(estimates_more) + 1]] <<- list(estimator = estimator, estimand = estimand,
                                                         value = value, se = se, se_method = se_method,
                                                         mu1 = mu1, mu0 = mu0)
}
ybar1 <- mean(y[Tr == 1]); ybar0 <- mean(y[Tr == 0])
stopifnot(abs(ybar1 - ybar0 - dim_value) < 1e-12 * abs(dim_value))
# difference in means: the same number and SE whatever the estimand (it adjusts for nothing)
add_more("difference_in_means", "ATT", ybar1 - ybar0, dim_se, "unpooled variances", ybar1, ybar0)
add_more("difference_in_means", "ATC", ybar1 - ybar0, dim_se, "unpooled variances", ybar1, ybar0)

iodds <- (1 - e) / e                       # inverse odds; the treated units' ATC weight

# ipw (Horvitz-Thompson) ATC: tau = (1/n0) sum [T y (1-e)/e - (1-T) y]
#   g1 = T y (1-e)/e - (1-T) mu1   (mu1 = sum(T y (1-e)/e) / n0)
#                                                dg1/dbeta = - T y (1-e)/e x        dg1/dmu1 = -(1-T)
#   g0 = (1-T)(y - mu0)            (mu0 = ybar0) dg0/dbeta = 0                      dg0/dmu0 = -(1-T)
# The (1-T) multiplier on mu1 makes the randomness of n0 part of the equation (as T does for the ATT).
c_mu1 <- sum(Tr * y * iodds) / n0; c_mu0 <- ybar0
ipw_atc <- c_mu1 - c_mu0
stopifnot(abs(ipw_atc - sum(Tr * y * iodds - (1 - Tr) * y) / n0) < 1e-8)
se <- sandwich_se(g1 = Tr * y * iodds - (1 - Tr) * c_mu1, g0 = (1 - Tr) * (y - c_mu0),
                  dg1_db = X * (-Tr * y * iodds), dg0_db = X * 0,
                  dg1_dmu1 = -(1 - Tr), dg0_dmu0 = -(1 - Tr),
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * y * (1 - ee) / ee - (1 - Tr) * m1, (1 - Tr) * (y - m0)) },
                  mu1 = c_mu1, mu0 = c_mu0)
add_more("ipw", "ATC", ipw_atc, se, "sandwich", c_mu1, c_mu0)

# ipw_normalized (Hajek) ATC: tau = sum(T y (1-e)/e) / sum(T (1-e)/e) - ybar0
#   g1 = T (1-e)/e (y - mu1)       dg1/dbeta = - T (1-e)/e (y - mu1) x      dg1/dmu1 = - T (1-e)/e
#   g0 = (1-T)(y - mu0)            dg0/dbeta = 0                            dg0/dmu0 = -(1-T)
c_mu1 <- sum(Tr * iodds * y) / sum(Tr * iodds); c_mu0 <- ybar0
se <- sandwich_se(g1 = Tr * iodds * (y - c_mu1), g0 = (1 - Tr) * (y - c_mu0),
                  dg1_db = X * (-Tr * iodds * (y - c_mu1)), dg0_db = X * 0,
                  dg1_dmu1 = -Tr * iodds, dg0_dmu0 = -(1 - Tr),
                  gfun = function(b, m1, m0) { ee <- plogis(as.numeric(X %*% b)); cbind(Tr * (1 - ee) / ee * (y - m1), (1 - Tr) * (y - m0)) },
                  mu1 = c_mu1, mu0 = c_mu0)
add_more("ipw_normalized", "ATC", c_mu1 - c_mu0, se, "sandwich", c_mu1, c_mu0)

# aipw ATC: the treated-arm model f1 predicts Y(1) for the controls, corrected by the treated units'
# residuals weighted by the inverse odds:
#   mu1 = sum [(1-T) f1 + T (1-e)/e (y - f1)] / n0,  mu0 = ybar0,
#   tau = sum [T (1-e)/e (y - f1) - (1-T)(y - f1)] / n0
#   psi_i = (T (1-e)/e (y - f1) - (1-T)(y - f1 + tau)) / (n0/n);  SE = sqrt(sum psi_i^2) / n
r1 <- y - m1hat
c_mu1 <- sum((1 - Tr) * m1hat + Tr * iodds * r1) / n0; c_mu0 <- ybar0
aipw_atc <- sum(Tr * iodds * r1 - (1 - Tr) * r1) / n0
stopifnot(abs(aipw_atc - (c_mu1 - c_mu0)) < 1e-8 * max(1, abs(aipw_atc)))
psi_c <- (Tr * iodds * r1 - (1 - Tr) * (r1 + aipw_atc)) / (n0 / n)
stopifnot(abs(mean(psi_c)) < 1e-6)
add_more("aipw", "ATC", aipw_atc, sqrt(sum(psi_c^2)) / n, "influence function", c_mu1, c_mu0)

# ---------------------------------------------------------------------------------------------
# 8b. Weight truncation. Pooled (Cole & Hernan 2008: stabilised weights truncated at percentiles of their
#     distribution over all units): arm a's positive weights divided by their mean m_a, s = w / m_a;
#     L, U = quantile(s, c(lo, hi) / 100, type = 7) over all units with w > 0; arm a's weights moved into
#     [L m_a, U m_a]; zero weights stay zero. Within arms (the option): each arm's weights moved into
#     its own quantile(w_a, c(lo, hi) / 100, type = 7). Kish ESS per arm after truncation.
# ---------------------------------------------------------------------------------------------
truncate_weights <- function(w, Tr, lo, hi, pooled) {
  if (pooled) {
    pos <- w > 0
    m <- c(mean(w[Tr == 1 & pos]), mean(w[Tr == 0 & pos]))
    s <- ifelse(Tr == 1, w / m[1], w / m[2])
    q <- unname(quantile(s[pos], c(lo, hi) / 100, type = 7))
    b1 <- q * m[1]; b0 <- q * m[2]
  } else {
    b1 <- unname(quantile(w[Tr == 1], c(lo, hi) / 100, type = 7))
    b0 <- unname(quantile(w[Tr == 0], c(lo, hi) / 100, type = 7))
  }
  lo_b <- ifelse(Tr == 1, b1[1], b0[1]); hi_b <- ifelse(Tr == 1, b1[2], b0[2])
  wt <- ifelse(w == 0, 0, pmin(pmax(w, lo_b), hi_b))
  list(lo_percentile = lo, hi_percentile = hi, pooled = pooled,
       treated_bounds = arr(b1), control_bounds = arr(b0), changed = sum(wt != w),
       ess_treated = kish(wt[Tr == 1]), ess_control = kish(wt[Tr == 0]))
}
ew_ate <- Tw / ew + (1 - Tw) / (1 - ew)
truncation <- list(
  water_ate_pooled_1_99 = truncate_weights(ew_ate, Tw, 1, 99, TRUE),
  water_ate_within_arms_1_99 = truncate_weights(ew_ate, Tw, 1, 99, FALSE),
  nsw_ate_pooled_5_95 = truncate_weights(w_ate, Tr, 5, 95, TRUE)
)

# ---------------------------------------------------------------------------------------------
# 9. Calibration of the propensity scores (Hosmer & Lemeshow 1980, deciles of risk), by the textbook
#    formula on the glm fitted scores of section 2 (NSW) and section 7 (water audits):
#      breaks = unique(quantile(e, probs = seq(0, 1, 0.1), type = 7)); groups = cut(e, breaks,
#      include.lowest = TRUE, right = TRUE); per group O = treated units, E = sum of e, n = units;
#      C = sum (O - E)^2 / (E (1 - E / n)),  df = G - 2,  p = pchisq(C, df, lower.tail = FALSE).
#    Tails: binom.test(O, n, E / n)$p.value (two-sided exact binomial) in the lowest and highest group.
# ---------------------------------------------------------------------------------------------
hosmer_lemeshow <- function(e, Tr) {
  br <- unique(quantile(e, probs = seq(0, 1, 0.1), type = 7, names = FALSE))
  g <- cut(e, breaks = br, include.lowest = TRUE, right = TRUE, labels = FALSE)
  G0 <- length(br) - 1
  n_g <- tabulate(g, G0)
  O <- vapply(seq_len(G0), function(k) sum(Tr[g == k]), 0)
  E <- vapply(seq_len(G0), function(k) sum(e[g == k]), 0)
  keep <- n_g > 0
  lo <- br[-length(br)][keep]; hi <- br[-1][keep]; n_g <- n_g[keep]; O <- O[keep]; E <- E[keep]
  G <- length(n_g)
  C <- sum((O - E)^2 / (E * (1 - E / n_g)))
  df <- G - 2
  tail_test <- function(k) list(n = n_g[k], observed_treated = O[k], expected_treated = E[k],
                                mean_score = E[k] / n_g[k], p_value = binom.test(O[k], n_g[k], E[k] / n_g[k])$p.value)
  list(statistic = C, df = df, p_value = pchisq(C, df, lower.tail = FALSE),
       groups = list(lo = arr(lo), hi = arr(hi), n = arr(as.integer(n_g)), observed_treated = arr(O), expected_treated = arr(E)),
       tails = list(lowest = tail_test(1), highest = tail_test(G)))
}
calibration <- list(nsw = hosmer_lemeshow(e, Tr), water_audits = hosmer_lemeshow(ew, Tw))

# ---------------------------------------------------------------------------------------------
# JSON
# ---------------------------------------------------------------------------------------------
res <- list(
  meta = list(
    r_version = R.version.string,
    script = "testdata/reference/nsw_reference.R",
    data = "testdata/nsw_dehejia_wahba.csv",
    n = n, n_treated = n1, n_control = n0,
    treatment = "treat", outcome = "re78",
    covariates = arr(covs)
  ),
  difference_in_means = list(value = dim_value, se = dim_se,
                             mean_treated = mean(y[Tr == 1]), mean_control = mean(y[Tr == 0]),
                             published_value = 1794, published_source = "Dehejia & Wahba (1999), JASA 94(448)"),
  glm = list(
    formula = paste(deparse(fml, width.cutoff = 500L), collapse = ""),
    terms = arr(terms),
    coef = arr(unname(cf[, 1])),
    se = arr(unname(cf[, 2])),
    deviance = fit$deviance,
    null_deviance = fit$null.deviance,
    iterations = fit$iter,
    converged = fit$converged,
    auc = auc,
    fitted = arr(e)
  ),
  balance = balance,
  balance_weighted_ate = balance_weighted_ate,
  balance_weighted_ato = balance_weighted_ato,
  balance_weighted_ate_weighted_sd = balance_weighted_ate_weighted_sd,
  ess = ess,
  categorical = list(
    data = "testdata/reference/nsw_schooling.csv",
    formula = "treat ~ age + schooling + black + re75",
    levels = as.list(setNames(as.integer(tab), names(tab))),
    reference_level = ref_level,
    terms = arr(cat_terms),
    coef = arr(unname(cfc[, 1])),
    se = arr(unname(cfc[, 2])),
    deviance = fit_cat$deviance,
    null_deviance = fit_cat$null.deviance,
    iterations = fit_cat$iter
  ),
  estimates = estimates,
  estimates_more = estimates_more,
  regression_adjustment_hc = regression_adjustment_hc,
  truncation = truncation,
  calibration = calibration,
  separation = list(
    data = "testdata/reference/separation.csv",
    formula = "treat ~ x1 + gate",
    n = ns, treated_when_gate_1 = sum(treat_s[gate == 1]), n_gate_1 = sum(gate == 1),
    terms = arr(sep_terms),
    crosstab_gate_treat = list("gate=0" = list(control = sum(gate == 0 & treat_s == 0), treated = sum(gate == 0 & treat_s == 1)),
                               "gate=1" = list(control = sum(gate == 1 & treat_s == 0), treated = sum(gate == 1 & treat_s == 1))),
    default_control = sep_default,
    tight_control = sep_tight,
    gate0_subset_fit = list(formula = "treat ~ x1 on rows with gate == 0", terms = arr(c("(intercept)", "x1")),
                            coef = arr(unname(cfsub[, 1])), se = arr(unname(cfsub[, 2])))
  ),
  trimming = list(
    data = "testdata/water_audits.csv",
    treatment = "audit == \"yes\"", outcome = "litres_per_day", covariates = arr(wcovs),
    formula = paste(deparse(wfml, width.cutoff = 500L), collapse = ""),
    glm_coef = arr(unname(coef(wfit))),
    n = nrow(wa), n_treated = sum(Tw),
    crump = c(list(alpha = cr$alpha, gamma_threshold = cr$c), kept_counts(ew >= cr$alpha & ew <= 1 - cr$alpha)),
    crump_nsw_alpha = cr_nsw$alpha,
    percentile_5_95 = c(list(lo = q5, hi = q95), kept_counts(keep_pct)),
    symmetric_0.1 = c(kept_counts(keep10), list(refit_coef = arr(unname(coef(fk))), estimates = trim_est))
  )
)
writeLines(to_json(res), file.path(out_dir, "nsw_reference.json"))

# Short human summary on stdout
cat(R.version.string, "\n")
cat(sprintf("difference in means %.4f (SE %.4f)\n", dim_value, dim_se))
print(cf)
cat(sprintf("AUC %.6f  deviance %.6f  null %.6f  iterations %d\n", auc, fit$deviance, fit$null.deviance, fit$iter))
for (x in estimates) cat(sprintf("%-22s %-4s %12.4f  SE %10.4f  %s\n", x$estimator, x$estimand, x$value, x$se, x$se_method))
for (x in estimates_more) cat(sprintf("%-22s %-4s %12.4f  SE %10.4f  %s\n", x$estimator, x$estimand, x$value, x$se, x$se_method))
cat("schooling reference level:", ref_level, "\n"); print(cfc)
cat("separation, default control: warnings:", length(sep_default$warnings$v), " gate coef", sep_default$coef$v[3], " SE", sep_default$se$v[3], "\n")
cat(sprintf("trimming (water audits): Crump alpha %.6f keeps %d of %d; percentile [%.6f, %.6f] keeps %d\n", cr$alpha,
            sum(ew >= cr$alpha & ew <= 1 - cr$alpha), nrow(wa), q5, q95, sum(keep_pct)))
for (nm in names(calibration)) cat(sprintf("calibration (%s): Hosmer-Lemeshow C %.4f df %d p %.4g; tails p %.4g / %.4g\n", nm,
  calibration[[nm]]$statistic, calibration[[nm]]$df, calibration[[nm]]$p_value, calibration[[nm]]$tails$lowest$p_value, calibration[[nm]]$tails$highest$p_value))
for (x in trim_est) cat(sprintf("  after trimming at 0.1: %-22s %-4s %12.4f  SE %10.4f\n", x$estimator, x$estimand, x$value, x$se))
cat("separation, epsilon 1e-12: warnings:", sep_tight$warnings$v, " gate coef", sep_tight$coef$v[3], " SE", sep_tight$se$v[3], "\n")
