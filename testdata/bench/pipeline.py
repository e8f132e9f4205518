#!/usr/bin/python3
"""Reference pipeline for the side-by-side benchmark (testdata/bench/run.sh).

The job `counterpart report --json` does on a file with a 0/1 treatment, a
numeric outcome and numeric covariates, written with general-purpose
libraries only (pandas, numpy, statsmodels):

  read the CSV; logistic propensity fit (statsmodels GLM, binomial, IRLS);
  common-support band (the overlap of the arms' score ranges) and the units
  outside it; SMDs and variance ratios before and after ATE weights;
  IPW (Horvitz-Thompson and normalised) and AIPW (per-arm OLS outcome
  models) for the ATE with influence-function standard errors.

It does less than the report (no KS statistics, positivity cells, AUC,
calibration, separation checks, trimming, extrapolation audit or verdict),
so the ratio it gives is conservative for counterpart.

  /usr/bin/python3 testdata/bench/pipeline.py FILE TREATMENT OUTCOME COV1,COV2,...  [--json OUT]

Debian: apt-get install -y python3-pandas python3-statsmodels
"""
import json
import sys

import numpy as np
import pandas as pd
import statsmodels.api as sm


def smd_vr(x, t, w):
    """SMD (pooled-SD form, Austin 2009) and variance ratio, weighted by w."""
    out = []
    for a in (1, 0):
        m = t == a
        xa, wa = x[m], w[m]
        sw = wa.sum()
        mean = (wa * xa).sum() / sw
        var = (wa * (xa - mean) ** 2).sum() / (sw - (wa ** 2).sum() / sw)
        out.append((mean, var))
    (m1, v1), (m0, v0) = out
    return (m1 - m0) / np.sqrt((v1 + v0) / 2), v1 / v0


def main():
    args = sys.argv[1:]
    out = None
    if "--json" in args:
        i = args.index("--json")
        out = args[i + 1]
        del args[i:i + 2]
    path, treat, outcome, covs = args[0], args[1], args[2], args[3].split(",")
    df = pd.read_csv(path)
    t = df[treat].to_numpy(dtype=float)
    y = df[outcome].to_numpy(dtype=float)
    X = sm.add_constant(df[covs].to_numpy(dtype=float), has_constant="add")

    fit = sm.GLM(t, X, family=sm.families.Binomial()).fit()
    e = fit.predict(X)

    lo = max(e[t == 1].min(), e[t == 0].min())
    hi = min(e[t == 1].max(), e[t == 0].max())
    outside = (e < lo) | (e > hi)

    w = np.where(t == 1, 1 / e, 1 / (1 - e))
    ones = np.ones_like(t)
    balance = []
    for j, name in enumerate(covs):
        x = X[:, j + 1]
        s, v = smd_vr(x, t, ones)
        sw, vw = smd_vr(x, t, w)
        balance.append({"term": name, "smd": s, "variance_ratio": v, "smd_weighted": sw, "variance_ratio_weighted": vw})

    n = len(t)
    ht_terms = t * y / e - (1 - t) * y / (1 - e)
    ht = ht_terms.mean()
    ht_se = ht_terms.std(ddof=1) / np.sqrt(n)
    w1, w0 = t / e, (1 - t) / (1 - e)
    mu1_ipw, mu0_ipw = (w1 * y).sum() / w1.sum(), (w0 * y).sum() / w0.sum()
    hajek = mu1_ipw - mu0_ipw

    m1 = sm.OLS(y[t == 1], X[t == 1]).fit()
    m0 = sm.OLS(y[t == 0], X[t == 0]).fit()
    mu1, mu0 = m1.predict(X), m0.predict(X)
    psi = mu1 - mu0 + t * (y - mu1) / e - (1 - t) * (y - mu0) / (1 - e)
    aipw = psi.mean()
    aipw_se = psi.std(ddof=1) / np.sqrt(n)

    res = {
        "rows": n,
        "treated": int(t.sum()),
        "coefficients": fit.params.tolist(),
        "support": [lo, hi],
        "outside_treated": int((outside & (t == 1)).sum()),
        "outside_control": int((outside & (t == 0)).sum()),
        "balance": balance,
        "ipw": {"value": ht, "se": ht_se},
        "ipw_normalized": {"value": hajek},
        "aipw": {"value": aipw, "se": aipw_se},
    }
    text = json.dumps(res, indent=2)
    if out:
        with open(out, "w") as f:
            f.write(text + "\n")
    else:
        print(text)


if __name__ == "__main__":
    main()
