#!/usr/bin/python3
"""Reference runs-differ test for tests/test_calibrate_runs.c.

usage: runtest_crosscheck.py FORM THETA0 [THETA1] -- R0 Y0 S0 G0 R1 Y1 S1 G1 ...

FORM is "constant" (N = theta0) or "saturating" (N = theta0 (1 - exp(-theta1 R)); R = inf
allowed). Wald's variance-component test (Wald, A. 1947, "A note on regression analysis",
Ann. Math. Stat. 18, 586-589; Seely, J. F. & El-Bassiouni, Y. 1983, "Applying Wald's
variance component test", Ann. Stat. 11, 197-201; from memory) by a route of its own: the
standardised residuals e_i = (Y_i - N(R_i))/S_i regressed by statsmodels OLS on the whitened
Jacobian J (rows grad N / S_i, written out here) and on [J Z] (Z_ik = 1/S_i for the rows of
run k), the two nested fits compared by statsmodels' compare_f_test (its dof from the
matrices' numerical rank). Prints, one "key v..." line each (repr, 17 digits):
  wald   F dof1 dof2 p
  plain  F p     scipy.stats.f_oneway of e grouped by G (the plain one-way ANOVA)
"""
import sys

import numpy as np
import statsmodels.api as sm
from scipy import stats

args = sys.argv[1:]
form = args[0]
sep = args.index("--")
theta = [float(a) for a in args[1:sep]]
rows = np.array([float(a) for a in args[sep + 1:]]).reshape(-1, 4)
r, y, s, g = rows[:, 0], rows[:, 1], rows[:, 2], rows[:, 3].astype(int)
n = len(r)
if form == "constant":
    val = np.full(n, theta[0])
    grad = np.ones((n, 1))
else:
    a, b = theta
    ex = np.where(np.isinf(r), 0.0, np.exp(-b * np.where(np.isinf(r), 0.0, r)))
    val = a * (1 - ex)
    rr = np.where(np.isinf(r), 0.0, r)
    grad = np.column_stack([1 - ex, a * rr * ex])
e = (y - val) / s
J = grad / s[:, None]
labels = sorted(set(g))
Z = np.column_stack([np.where(g == k, 1.0 / s, 0.0) for k in labels])
m0 = sm.OLS(e, J).fit()
m1 = sm.OLS(e, np.column_stack([J, Z])).fit()
f, p, ddf = m1.compare_f_test(m0)
print("wald %r %r %r %r" % (float(f), float(ddf), float(m1.df_resid), float(p)))
fo = stats.f_oneway(*[e[g == k] for k in labels])
print("plain %r %r" % (float(fo.statistic), float(fo.pvalue)))
