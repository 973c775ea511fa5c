#!/usr/bin/python3
"""Reference fit for tests/test_regress.c: statsmodels WLS on a stagecal points file.

usage: regress_crosscheck.py POINTS.csv TERMS LEVEL [R F OBS_SIGMA]...
       regress_crosscheck.py --saturating-load POINTS.csv A B C D

The second form fits stages = (a + c·F + d·F²)·(1 − exp(−b·R)) (1 at R = inf) with
scipy.optimize.curve_fit (weights 1/sigma², covariance scaled, analytic Jacobian written
here, tolerances 1e-15) from
the start (A, B, C, D) and prints "params …" and "bse …".

TERMS is the '+'-joined list of linear-basis terms of a `linear:` form
(1, 1/R, L/V, lnR, F, F^2, 1/F), in stagecal's canonical order. The design matrix
is built here, independently of the C code. Weights are 1/sigma^2 when the file
has a sigma column, else 1. For every (R, F, OBS_SIGMA) triple the script prints
statsmodels' get_prediction(...).summary_frame(alpha) with weights 1/OBS_SIGMA^2.

Output, one "key value..." line each, numbers with repr() (17 significant digits):
  params, bse, ssr, scale, llf, rsquared, df_resid, then one "pred" line per point:
  mean mean_se mean_ci_lower mean_ci_upper obs_ci_lower obs_ci_upper; last "hc3_bse",
  the standard errors of the HC3 sandwich covariance (cov_type="HC3"), "hc2_bse"
  (cov_type="HC2"), "bm_dof" (the Bell-McCaffrey degrees of freedom of each parameter) and
  "bm_pred" (those of the fitted value at each (R, F) point): K = (sum lambda)^2 / sum
  lambda^2 over the eigenvalues lambda of G'G, G = (I - H) diag(a_i / sqrt(1 - h_ii)),
  a = X (X'X)^-1 c on the whitened design (Imbens & Kolesar 2016, Rev. Econ. Stat. 98,
  701-712, section III), by numpy's eigvalsh: a different route from the C code's trace
  identity.
"""
import csv
import math
import sys

import numpy as np


def read_rows(path):
    """CSV rows keyed by column name without its [unit] suffix."""
    rows = list(csv.DictReader(open(path, newline="")))
    return [{k.split("[")[0]: v for k, v in row.items()} for row in rows]


def term(name, r, f):
    if name == "1":
        return 1.0
    if name == "1/R":
        return 0.0 if math.isinf(r) else 1.0 / r
    if name == "L/V":
        return 1.0 if math.isinf(r) else r / (r + 1.0)
    if name == "lnR":
        return math.log(r)
    if name == "F":
        return f
    if name == "F^2":
        return f * f
    if name == "1/F":
        return 1.0 / f
    raise SystemExit("unknown term " + name)


def saturating_load(path, start):
    from scipy.optimize import curve_fit
    rows = read_rows(path)
    r = np.array([float(row["R"]) for row in rows])
    f = np.array([float(row["F"]) for row in rows])
    y = np.array([float(row["stages"]) for row in rows])
    s = np.array([float(row["sigma"]) for row in rows])

    def model(i, a, b, c, d):
        i = i.astype(int)
        ri, fi = r[i], f[i]
        finite = np.isfinite(ri)
        sat = np.where(finite, -np.expm1(-b * np.where(finite, ri, 1.0)), 1.0)
        return (a + c * fi + d * fi * fi) * sat

    def jac(i, a, b, c, d):
        # analytic Jacobian (curve_fit would otherwise difference numerically, which
        # limits the covariance to ~1e-6)
        i = i.astype(int)
        ri, fi = r[i], f[i]
        finite = np.isfinite(ri)
        rr = np.where(finite, ri, 1.0)
        sat = np.where(finite, -np.expm1(-b * rr), 1.0)
        dsat = np.where(finite, rr * np.exp(-b * rr), 0.0)
        amp = a + c * fi + d * fi * fi
        return np.column_stack([sat, amp * dsat, fi * sat, fi * fi * sat])

    p, cov = curve_fit(model, np.arange(len(y), dtype=float), y, p0=start, sigma=s,
                       absolute_sigma=False, method="lm", jac=jac, ftol=1e-15, xtol=1e-15,
                       gtol=1e-15)
    sys.stdout.write("params " + " ".join(repr(float(v)) for v in p) + "\n")
    sys.stdout.write("bse " + " ".join(repr(float(v)) for v in np.sqrt(np.diag(cov))) + "\n")


def main():
    if sys.argv[1] == "--saturating-load":
        saturating_load(sys.argv[2], [float(v) for v in sys.argv[3:7]])
        return
    path, terms, level = sys.argv[1], sys.argv[2].split("+"), float(sys.argv[3])
    rows = read_rows(path)
    r = [float(row["R"]) for row in rows]
    f = [float(row["F"]) if "F" in row else 0.0 for row in rows]
    y = np.array([float(row["stages"]) for row in rows])
    w = np.array([1.0 / float(row["sigma"]) ** 2 if "sigma" in row else 1.0 for row in rows])
    X = np.array([[term(t, ri, fi) for t in terms] for ri, fi in zip(r, f)])
    # imported here: the --saturating-load mode needs only scipy (statsmodels is slow to load)
    from statsmodels.regression.linear_model import WLS
    res = WLS(y, X, weights=w).fit()
    out = sys.stdout
    out.write("params " + " ".join(repr(float(v)) for v in res.params) + "\n")
    out.write("bse " + " ".join(repr(float(v)) for v in res.bse) + "\n")
    out.write("ssr %r\nscale %r\nllf %r\nrsquared %r\ndf_resid %r\n"
              % (float(res.ssr), float(res.scale), float(res.llf), float(res.rsquared),
                 float(res.df_resid)))
    args = sys.argv[4:]
    for i in range(0, len(args), 3):
        ri, fi, so = float(args[i]), float(args[i + 1]), float(args[i + 2])
        x0 = np.array([[term(t, ri, fi) for t in terms]])
        sf = res.get_prediction(x0, weights=np.array([1.0 / so ** 2])).summary_frame(
            alpha=1.0 - level)
        row = sf.iloc[0]
        out.write("pred " + " ".join(repr(float(row[k])) for k in (
            "mean", "mean_se", "mean_ci_lower", "mean_ci_upper", "obs_ci_lower",
            "obs_ci_upper")) + "\n")
    # the HC3 sandwich (MacKinnon & White 1985) of the same weighted fit: statsmodels takes
    # the whitened design and residuals, as stagecal's STAGECAL_COV_HC3 does
    hc3 = WLS(y, X, weights=w).fit(cov_type="HC3")
    out.write("hc3_bse " + " ".join(repr(float(v)) for v in hc3.bse) + "\n")
    hc2 = WLS(y, X, weights=w).fit(cov_type="HC2")
    out.write("hc2_bse " + " ".join(repr(float(v)) for v in hc2.bse) + "\n")
    xw = X * np.sqrt(w)[:, None]
    xtxi = np.linalg.inv(xw.T @ xw)
    hat = xw @ xtxi @ xw.T
    lev = np.diag(hat)

    def bm_dof(c):
        g = (np.eye(len(y)) - hat) * ((xw @ xtxi @ c) / np.sqrt(1 - lev))[None, :]
        lam = np.linalg.eigvalsh(g.T @ g)
        return float(lam.sum() ** 2 / (lam ** 2).sum())

    out.write("bm_dof " + " ".join(repr(bm_dof(c)) for c in np.eye(X.shape[1])) + "\n")
    out.write("bm_pred " + " ".join(
        repr(bm_dof(np.array([term(t, float(args[i]), float(args[i + 1])) for t in terms])))
        for i in range(0, len(args), 3)) + "\n")


if __name__ == "__main__":
    main()
