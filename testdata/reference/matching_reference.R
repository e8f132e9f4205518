# Reference values for counterpart's matching and subclassification, computed with base R and the
# 'stats' package only (no contributed packages), by the textbook formulas written out below.
# Run from the repository root:
#   Rscript testdata/reference/matching_reference.R
# Reads   testdata/nsw_dehejia_wahba.csv
# Writes  testdata/reference/matching_reference.json (numbers printed with 17 significant digits)
#
# Everything is computed by brute force (all pairwise distances), independently of the Go code's
# sorted search.

stopifnot(file.exists("testdata/nsw_dehejia_wahba.csv"))
out_dir <- Sys.getenv("COUNTERPART_REF_OUT", "testdata/reference")

num <- function(v) if (is.finite(v)) sprintf("%.17g", v) else "null"
arrn <- function(v) paste0("[", paste(vapply(v, num, ""), collapse = ", "), "]")
arri <- function(v) paste0("[", paste(sprintf("%d", as.integer(v)), collapse = ", "), "]")

d <- read.csv("testdata/nsw_dehejia_wahba.csv")
stopifnot(nrow(d) == 445)
covs <- c("age", "educ", "black", "hisp", "married", "nodegr", "re74", "re75")
Tr <- d$treat
y <- d$re78
n <- nrow(d)

# Propensity: the main-effects logistic model of nsw_reference.R, with a tight tolerance so that the
# fitted scores are the maximum-likelihood ones to ~1e-13 (the Go fit stops as close).
fml <- treat ~ age + educ + black + hisp + married + nodegr + re74 + re75
fit <- glm(fml, family = binomial, data = d, control = glm.control(epsilon = 1e-14, maxit = 100))
stopifnot(fit$converged)
e <- as.numeric(fitted(fit))
l <- log(e / (1 - e))                            # the logit of the score
# Distances within tol of the K-th are ties: exact ties (age enters linearly, so units a year older and a
# year younger are equally far) would otherwise be broken by rounding error.
logit_sd <- sqrt((var(l[Tr == 1]) + var(l[Tr == 0])) / 2)
tol <- 1e-10 * logit_sd

# ---------------------------------------------------------------------------------------------
# Nearest-neighbour matching with replacement on l, K matches, ties at the K-th distance included
# and averaged (Abadie & Imbens 2006). For a unit i of arm a, J(i) = units j of arm 1 - a with
# |l_i - l_j| <= the K-th smallest such distance.
# Missing potential outcome: mean of y over J(i). Matched units: the treated (ATT), controls (ATC),
# all units (ATE); N of them.
# (|l_i - l_j| <= K-th smallest + tol: see tol above).
#   tau = (1/N) sum_i [Yhat_i(1) - Yhat_i(0)]
# Weights: w_j = sum over sets containing j of 1/|J(i)|; q_j = sum of 1/|J(i)|^2; m_j = 1 if j is a
# matched unit. Abadie-Imbens (2006) variance, the score taken as known:
#   Var = (1/N^2) [ sum_i (Yhat_i(1) - Yhat_i(0) - tau)^2 + sum_j (w_j^2 - q_j + 2 m_j w_j) sigma2_j ]
# (without ties: (K/M)^2 + (2M-1)/M (K/M) for the ATE and K(K-1)/M^2 for the ATT, their Theorem 7);
#   sigma2_j = J'/(J'+1) (y_j - mean of y over L(j))^2,
# L(j) = the K nearest other units of j's own arm (ties at the K-th distance included), J' = |L(j)|.
# ---------------------------------------------------------------------------------------------
nearest_set <- function(i, pool, K) {
  pool <- pool[pool != i]
  dd <- abs(l[pool] - l[i])
  kth <- sort(dd)[K]
  pool[dd <= kth + tol]
}
matching <- function(estimand, K) {
  targets <- switch(estimand, ATT = which(Tr == 1), ATC = which(Tr == 0), ATE = seq_len(n))
  w <- numeric(n); q <- numeric(n); mflag <- numeric(n)
  tau_i <- numeric(length(targets)); y1 <- tau_i; y0 <- tau_i
  sets <- vector("list", length(targets))
  for (k in seq_along(targets)) {
    i <- targets[k]
    J <- nearest_set(i, which(Tr != Tr[i]), K)
    sets[[k]] <- J
    mJ <- mean(y[J])
    if (Tr[i] == 1) { y1[k] <- y[i]; y0[k] <- mJ } else { y1[k] <- mJ; y0[k] <- y[i] }
    w[J] <- w[J] + 1 / length(J)
    q[J] <- q[J] + 1 / length(J)^2
    mflag[i] <- 1
  }
  tau_i <- y1 - y0
  N <- length(targets)
  tau <- mean(tau_i)
  coef <- w^2 - q + 2 * mflag * w
  sigma2 <- numeric(n)
  for (j in which(coef != 0)) {
    L <- nearest_set(j, which(Tr == Tr[j]), K)
    sigma2[j] <- length(L) / (length(L) + 1) * (y[j] - mean(y[L]))^2
  }
  v <- (sum((tau_i - tau)^2) + sum(coef * sigma2)) / N^2
  # Cross-check against the tie-free textbook form when no set has ties.
  if (all(vapply(sets, length, 1L) == K)) {
    Km <- w * K                                   # K_M(j): times j is used
    if (estimand == "ATE") {
      v2 <- (sum((tau_i - tau)^2) + sum(((Km / K)^2 + (2 * K - 1) / K * (Km / K)) * sigma2)) / N^2
    } else {
      v2 <- (sum((tau_i - tau)^2) + sum(Km * (Km - 1) / K^2 * sigma2)) / N^2
    }
    stopifnot(abs(v2 - v) <= 1e-12 * v)
  }
  list(estimand = estimand, k = K, value = tau, se = sqrt(v), mu1 = mean(y1), mu0 = mean(y0),
       n_matched = N, sets = sets, targets = targets, weights = w + mflag,
       tied_sets = sum(vapply(sets, length, 1L) > K), used = sum(w > 0), max_reuse = max(vapply(seq_len(n), function(j) sum(vapply(sets, function(s) j %in% s, TRUE)), 1L)))
}
runs <- list(matching("ATT", 1), matching("ATC", 1), matching("ATE", 1), matching("ATT", 3))

# Balance after matching (ATT, K = 1): SMD of each covariate with the matching weights: weighted means
# sum(w x)/sum(w) over the unweighted pooled SD sqrt((s1^2 + s0^2)/2) of the data before matching (n - 1
# variances; p(1 - p) of the unweighted proportions for 0/1 covariates), the same denominator before and
# after (Rosenbaum & Rubin 1985; Stuart 2010).
att <- runs[[1]]
smd_w <- vapply(covs, function(cn) {
  x <- d[[cn]]; wt <- att$weights
  m1 <- sum(wt[Tr == 1] * x[Tr == 1]) / sum(wt[Tr == 1]); m0 <- sum(wt[Tr == 0] * x[Tr == 0]) / sum(wt[Tr == 0])
  if (all(x %in% c(0, 1))) {
    p1 <- mean(x[Tr == 1]); p0 <- mean(x[Tr == 0]); v1 <- p1 * (1 - p1); v0 <- p0 * (1 - p0)
  } else {
    v1 <- var(x[Tr == 1]); v0 <- var(x[Tr == 0])
  }
  (m1 - m0) / sqrt((v1 + v0) / 2)
}, 0)

# ---------------------------------------------------------------------------------------------
# Subclassification (Rosenbaum & Rubin 1984): S = 5 strata cut at quantile(e, (1:(S-1))/S, type = 7)
# (R's default); a unit on a cut point goes to the upper stratum (findInterval counts the cuts <= e).
# Per stratum s: tau_s = ybar1s - ybar0s, V_s = s1s^2/n1s + s0s^2/n0s (n-1 variances).
# Weights w_s = n_s/n (ATE), n1s/n1 (ATT), n0s/n0 (ATC); tau = sum w_s tau_s; Var = sum w_s^2 V_s.
# ---------------------------------------------------------------------------------------------
S <- 5
cuts <- unname(quantile(e, (1:(S - 1)) / S, type = 7))
stratum <- findInterval(e, cuts) + 1
tab <- table(factor(stratum, levels = 1:S), factor(Tr, levels = c(0, 1)))
stopifnot(all(tab > 1))
tau_s <- numeric(S); V_s <- numeric(S)
for (s in 1:S) {
  y1 <- y[stratum == s & Tr == 1]; y0 <- y[stratum == s & Tr == 0]
  tau_s[s] <- mean(y1) - mean(y0)
  V_s[s] <- var(y1) / length(y1) + var(y0) / length(y0)
}
sub <- lapply(c("ATE", "ATT", "ATC"), function(est) {
  ws <- switch(est, ATE = tab[, 1] + tab[, 2], ATT = tab[, 2], ATC = tab[, 1])
  ws <- as.numeric(ws) / sum(ws)
  list(estimand = est, value = sum(ws * tau_s), se = sqrt(sum(ws^2 * V_s)))
})

# ---------------------------------------------------------------------------------------------
# JSON
# ---------------------------------------------------------------------------------------------
run_json <- function(r) {
  sets <- paste0("[", paste(vapply(seq_along(r$sets), function(k)
    paste0("[", r$targets[k], ", ", arri(r$sets[[k]]), "]"), ""), collapse = ", "), "]")
  paste0("    {\"estimator\": \"nearest_neighbour_matching\", \"estimand\": \"", r$estimand, "\", \"k\": ", r$k,
         ", \"value\": ", num(r$value), ", \"se\": ", num(r$se), ", \"mu1\": ", num(r$mu1), ", \"mu0\": ", num(r$mu0),
         ", \"n_matched\": ", r$n_matched, ", \"tied_sets\": ", r$tied_sets, ", \"used\": ", r$used, ", \"max_reuse\": ", r$max_reuse,
         ",\n     \"sets\": ", sets, "}")
}
js <- paste0("{\n",
  "  \"meta\": {\"r_version\": \"", R.version.string, "\", \"script\": \"testdata/reference/matching_reference.R\", ",
  "\"data\": \"testdata/nsw_dehejia_wahba.csv\", \"n\": ", n, ", \"rows\": \"1-based data rows\", \"logit_sd\": ", num(logit_sd), ", \"tie_tolerance\": ", num(tol), "},\n",
  "  \"logit\": ", arrn(l), ",\n",
  "  \"matching\": [\n", paste(vapply(runs, run_json, ""), collapse = ",\n"), "\n  ],\n",
  "  \"balance_att_k1\": {", paste0("\"", covs, "\": ", vapply(smd_w, num, ""), collapse = ", "), "},\n",
  "  \"subclassification\": {\"strata\": ", S, ", \"cuts\": ", arrn(cuts),
  ", \"treated\": ", arri(tab[, 2]), ", \"control\": ", arri(tab[, 1]),
  ", \"effect\": ", arrn(tau_s), ", \"variance\": ", arrn(V_s), ",\n    \"estimates\": [",
  paste(vapply(sub, function(x) paste0("{\"estimator\": \"subclassification\", \"estimand\": \"", x$estimand,
    "\", \"value\": ", num(x$value), ", \"se\": ", num(x$se), "}"), ""), collapse = ", "), "]}\n",
  "}\n")
tmp <- file.path(out_dir, "matching_reference.json.tmp")
writeLines(js, tmp, sep = "")
invisible(file.rename(tmp, file.path(out_dir, "matching_reference.json")))

cat(R.version.string, "\n")
for (r in runs) cat(sprintf("matching %s K=%d: %.6f (SE %.6f), %d matched, %d tied sets, %d used, max reuse %d\n",
                            r$estimand, r$k, r$value, r$se, r$n_matched, r$tied_sets, r$used, r$max_reuse))
for (x in sub) cat(sprintf("subclassification %s: %.6f (SE %.6f)\n", x$estimand, x$value, x$se))
print(tab)
