#!/usr/bin/python3
"""Reference CR2 covariance and Bell-McCaffrey dof for tests/test_regress_bm.c.

usage: cr2_crosscheck.py R0 Y0 S0 G0 R1 Y1 S1 G1 ...

Fits stages = b0 + b1/R by weighted least squares (weights 1/S^2, numpy lstsq on the
whitened design built here) and prints, one "key v..." line each (repr, 17 digits):
  params  b0 b1
  cr2_cov V00 V01 V10 V11   the CR2 sandwich clustered by G (Bell, R. M. & McCaffrey,
          D. F. 2002, "Bias reduction in standard errors for linear regression with
          multi-stage samples", Survey Methodology 28, 169-181):
          V = B (sum_g X_g' A_g e_g e_g' A_g X_g) B, B = (X'X)^-1, A_g = (I - H_gg)^(-1/2)
          by numpy's eigh, on the whitened X and e; every matrix written out in full
  cr0_cov V00 V01 V10 V11   the same without A_g (statsmodels' cov_type='cluster' with
          use_correction=False), so the script checks itself against statsmodels
  sm_cr0  V00 V01 V10 V11   statsmodels' own
  cr2_dof d0 d1 dR3         the Bell-McCaffrey dof of b0, b1 and of the fitted value at R = 3
          (c = (1, 1/3)): the Satterthwaite dof (sum lambda)^2 / sum lambda^2 over the
          eigenvalues of the G x G matrix [p_g' p_h], p_g = (I - H)[:, g] A_g X_g B c
          (Pustejovsky, J. E. & Tipton, E. 2018, "Small-sample methods for cluster-robust
          variance estimation and hypothesis testing in fixed effects models", J. Bus.
          Econ. Stat. 36, 672-683, the working model Phi = I; numpy eigvalsh), a different
          route from the C code's sums.
"""
import sys

import numpy as np
import statsmodels.api as sm

v = [float(a) for a in sys.argv[1:]]
rows = np.array(v).reshape(-1, 4)
r, y, s, g = rows[:, 0], rows[:, 1], rows[:, 2], rows[:, 3].astype(int)
n = len(r)
w = 1.0 / s**2
X = np.column_stack([np.ones(n), 1.0 / r]) * np.sqrt(w)[:, None]
yw = y * np.sqrt(w)
beta = np.linalg.lstsq(X, yw, rcond=None)[0]
e = yw - X @ beta
B = np.linalg.inv(X.T @ X)
H = X @ B @ X.T
labels = sorted(set(g))
meat2 = np.zeros((2, 2))
meat0 = np.zeros((2, 2))
A = {}
for lab in labels:
    idx = np.where(g == lab)[0]
    Hg = H[np.ix_(idx, idx)]
    lam, Q = np.linalg.eigh(np.eye(len(idx)) - Hg)
    A[lab] = Q @ np.diag(lam**-0.5) @ Q.T
    u2 = X[idx].T @ A[lab] @ e[idx]
    u0 = X[idx].T @ e[idx]
    meat2 += np.outer(u2, u2)
    meat0 += np.outer(u0, u0)
V2 = B @ meat2 @ B
V0 = B @ meat0 @ B
fit = sm.WLS(y, np.column_stack([np.ones(n), 1.0 / r]), weights=w).fit(
    cov_type="cluster", cov_kwds={"groups": g, "use_correction": False, "df_correction": False})


def dof(c):
    M = np.eye(n) - H
    P = []
    for lab in labels:
        idx = np.where(g == lab)[0]
        P.append(M[:, idx] @ A[lab] @ X[idx] @ B @ c)
    P = np.column_stack(P)
    lam = np.linalg.eigvalsh(P.T @ P)
    return lam.sum()**2 / (lam**2).sum()


def out(key, vals):
    print(key, " ".join(repr(float(x)) for x in vals))


out("params", beta)
out("cr2_cov", V2.ravel())
out("cr0_cov", V0.ravel())
out("sm_cr0", np.asarray(fit.cov_params()).ravel())
out("cr2_dof", [dof(np.array([1.0, 0.0])), dof(np.array([0.0, 1.0])), dof(np.array([1.0, 1 / 3]))])
