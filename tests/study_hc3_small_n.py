#!/usr/bin/python3
"""Small-sample coverage of the HC2 and HC3 sandwiches, and of HC2 with Bell-McCaffrey
degrees of freedom, against the model's covariance (a study, not run by ctest; numpy +
scipy, independent of the C code).

Simulates what a one-month calibration looks like to the fit: n windows (4-20) at reflux
ratios cycling through 1.5, 2, 2.5, 3, 4, 5, a linear correlation stages = a + b/R (+ c*F)
with zero true parameters, normal window errors either equal (het 0) or 2.5 times larger
at R >= 3 (het 2.5: stated errors wrong in proportion, as on the demo scenario). For each
case it prints the coverage of the 95 % interval (t quantile at n - p) of the stages at
R = 5 with the model's covariance s^2 (X'X)^-1, with HC2 and HC3 (MacKinnon & White 1985),
with the larger of the model's and HC3, and with HC2 at the Bell-McCaffrey dof K_BM of
the contrast (Imbens & Kolesar 2016, Rev. Econ. Stat. 98, 701-712; printed last).

usage: study_hc3_small_n.py [REPS [SEED]]   (defaults 6000, 1)
"""
import sys

import numpy as np
from scipy import stats

REPS = int(sys.argv[1]) if len(sys.argv) > 1 else 6000
rng = np.random.default_rng(int(sys.argv[2]) if len(sys.argv) > 2 else 1)
RS = np.array([1.5, 2, 2.5, 3, 4, 5])


def study(n, with_f, het):
    r = RS[np.arange(n) % 6]
    f = 1 + 0.5 * ((np.arange(n) * 7) % n) / n
    x = np.column_stack([np.ones(n), 1 / r] + ([f] if with_f else []))
    p = x.shape[1]
    xtxi = np.linalg.inv(x.T @ x)
    lev = np.einsum("ij,jk,ik->i", x, xtxi, x)
    sd = np.where(r >= 3, het, 1.0) if het else np.ones(n)
    t = stats.t.ppf(0.975, n - p)
    g = np.array([1, 1 / 5] + ([1.5] if with_f else []))  # the stages at R = 5 (F = 1.5)
    # Bell-McCaffrey degrees of freedom for the contrast g (Imbens & Kolesar 2016, eq. 9):
    # K = (sum lambda)^2 / sum lambda^2, lambda the eigenvalues of G'G, G = M diag(a_i/sqrt(1-h_i)),
    # M = I - H, a = X (X'X)^-1 g; G'G = D M D, so K = tr(DMD)^2 / ||DMD||_F^2.
    m = np.eye(n) - x @ xtxi @ x.T
    d = (x @ xtxi @ g) / np.sqrt(1 - lev)
    gg = d[:, None] * m * d[None, :]
    kbm = np.trace(gg) ** 2 / np.sum(gg * gg)
    tbm = stats.t.ppf(0.975, kbm)
    cover = np.zeros(5)
    for _ in range(REPS):
        y = rng.normal(0, sd)
        b = xtxi @ x.T @ y
        e = y - x @ b
        vm = g @ (e @ e / (n - p) * xtxi) @ g
        vh = g @ (xtxi @ ((x * (e**2 / (1 - lev) ** 2)[:, None]).T @ x) @ xtxi) @ g
        v2 = g @ (xtxi @ ((x * (e**2 / (1 - lev))[:, None]).T @ x) @ xtxi) @ g
        est = abs(g @ b)
        cover += [est <= t * np.sqrt(vm), est <= t * np.sqrt(v2), est <= t * np.sqrt(vh),
                  est <= t * np.sqrt(max(vm, vh)), est <= tbm * np.sqrt(v2)]
    return np.append(cover / REPS, kbm)


print("form | het | windows | model | HC2 | HC3 | max(model, HC3) | HC2+BM | K_BM")
for with_f in (0, 1):
    for het in (0, 2.5):
        for n in (4, 5, 6, 8, 12, 20):
            if n - (2 + with_f) >= 1:
                c = study(n, with_f, het)
                print("%s | %g | %d | %.3f | %.3f | %.3f | %.3f | %.3f | %.1f"
                      % ("1+1/R+F" if with_f else "1+1/R", het, n, *c))
