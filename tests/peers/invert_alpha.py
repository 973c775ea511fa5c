#!/usr/bin/python3
"""Peer of `stagecal invert` for constant relative volatility, written the way a
careful numpy programmer would: the whole log is read with numpy.loadtxt, every row is
stepped at once (vectorised McCabe-Thiele stepping over the still-active rows), and the
uncertainty comes from central finite differences (six more vectorised inversions).

    usage: invert_alpha.py LOG.csv OUT.csv [ALPHA]

Stepping (constant molar overflow, total condenser, pot = one ideal stage):
    m = R/(R+1), b = xD/(R+1); y_n = m x_(n-1) + b, x_n = y_n / (y_n + alpha (1 - y_n));
    x_target = (y*(xB) - b)/m; stages = whole steps before the crossing + Smoker's
    fraction of the crossing step + 1 (the pot).
Smoker's count for constant alpha (Smoker, E. H. (1938), Trans. AIChE 34, 165):
    k = pinch root of the line with the curve, c = 1 + (alpha - 1) k,
    beta = m c (alpha - 1)/(alpha - m c^2), count from x0 to xn =
    ln((1/(xn - k) - beta)/(1/(x0 - k) - beta)) / ln(alpha/(m c^2)).
Uncertainty: u(N)^2 = (dN/dxD u_xD)^2 + (dN/dxB u_xB)^2 + (dN/dR r_rel R)^2 with the
demo column's u_xD = 0.002, u_xB = 0.004, r_rel = 0.03 (datasets/columns/demo_alpha.json).
Prints the CPU time of read, compute and write on stderr.
"""
import sys
import time

import numpy as np

U_XD, U_XB, U_RREL = 0.002, 0.004, 0.03
H_REL = np.cbrt(np.finfo(float).eps)  # central differences: h = cbrt(eps) * scale
MAX_STEPS = 200


def smoker_consts(alpha, m, b):
    a2 = m * (alpha - 1.0)
    a1 = m + b * (alpha - 1.0) - alpha
    disc = a1 * a1 - 4.0 * a2 * b
    with np.errstate(invalid="ignore", divide="ignore"):
        k = 2.0 * b / (-a1 + np.sqrt(disc))
        c = 1.0 + (alpha - 1.0) * k
        beta = m * c * (alpha - 1.0) / (alpha - m * c * c)
        lna = np.log(alpha / (m * c * c))
    return k, beta, lna


def step_rows(xd, xt, m, b, ok, xstar, fraction):
    """Vectorised stepping of the rows `ok` from xD down past x_target: stages (pot
    included) per row, NaN elsewhere. xstar(y) is the equilibrium liquid; fraction(j, xp,
    xn, yn) Smoker's fraction of the crossing step of rows j (from xp to x_target)."""
    out = np.full(xd.shape, np.nan)
    out[ok & (xt >= xd)] = 1.0
    idx = np.flatnonzero(ok & (xt < xd))
    x = xd[idx]
    n = 0
    while idx.size and n < MAX_STEPS:
        n += 1
        y = m[idx] * x + b[idx]
        xn = xstar(y)
        done = xn <= xt[idx]
        if done.any():
            f = fraction(idx[done], x[done], xn[done], y[done])
            out[idx[done]] = n + np.clip(f, 0.0, 1.0)  # (n - 1) whole + fraction + the pot
        keep = ~done & (xn < x)  # no progress: a pinch
        idx, x = idx[keep], xn[keep]
    return out


def invert(alpha, xd, xb, r):
    """Stages (pot included) for every row; NaN where not ok (pinch, invalid)."""
    m = r / (r + 1.0)
    b = xd / (r + 1.0)
    ypot = alpha * xb / (1.0 + (alpha - 1.0) * xb)
    xt = (ypot - b) / m
    k, beta, lna = smoker_consts(alpha, m, b)
    ok = (xb > 0) & (xb < xd) & (xd < 1) & (r > 0) & (xt > k)

    def fraction(j, xp, _xn, _yn):
        return np.log((1.0 / (xt[j] - k[j]) - beta[j]) / (1.0 / (xp - k[j]) - beta[j])) / lna[j]

    return step_rows(xd, xt, m, b, ok, lambda y: y / (y + alpha * (1.0 - y)), fraction)


def read_log(path):
    """run, t, xD, xB, R of a log with columns run,time,W,xD,xB,R,... (tests/bench_invert.c)."""
    t, xd, xb, r = np.loadtxt(path, delimiter=",", skiprows=1, usecols=(1, 3, 4, 5), unpack=True)
    run = np.loadtxt(path, delimiter=",", skiprows=1, usecols=(0,), dtype=str)
    return run, t, xd, xb, r


def stages_and_u(inv, xd, xb, r, u_xd, u_xb, u_r2):
    """Stages and u(N) by central differences of inv(xd, xb, r) (six more inversions)."""
    n0 = inv(xd, xb, r)
    hd = H_REL * np.minimum(xd, 1 - xd)
    hb = H_REL * np.minimum(xb, 1 - xb)
    hr = H_REL * r
    d_xd = (inv(xd + hd, xb, r) - inv(xd - hd, xb, r)) / (2 * hd)
    d_xb = (inv(xd, xb + hb, r) - inv(xd, xb - hb, r)) / (2 * hb)
    d_r = (inv(xd, xb, r + hr) - inv(xd, xb, r - hr)) / (2 * hr)
    return n0, np.sqrt((d_xd * u_xd) ** 2 + (d_xb * u_xb) ** 2 + d_r ** 2 * u_r2)


def write_rows(path, run, t, n, u, status, lv):
    """One formatted line per row (the fastest plain way: numpy's savetxt formats row by
    row in Python and was 4x slower here)."""
    fmt = "%s,%.3f,%.6f,%.6f,%.9g,%s,%.9f".__mod__
    with open(path, "w") as f:
        f.write("run,time[s],stages,column_stages,u_stages,status,L/V\n")
        f.write("\n".join(map(fmt, zip(run.tolist(), t.tolist(), n.tolist(), (n - 1).tolist(),
                                       u.tolist(), status.tolist(), lv.tolist()))))
        f.write("\n")


def main():
    if len(sys.argv) < 3:
        sys.exit("usage: invert_alpha.py LOG.csv OUT.csv [ALPHA]")
    alpha = float(sys.argv[3]) if len(sys.argv) > 3 else 2.5
    run_peer("alpha", lambda a, b, c: invert(alpha, a, b, c), U_XD, U_XB, lambda r: (U_RREL * r) ** 2)


def run_peer(name, inv, u_xd, u_xb, u_r2, setup=0.0):
    """The whole job on LOG.csv (argv[1]) into OUT.csv (argv[2]), CPU times on stderr."""
    c0 = time.process_time()
    run, t, xd, xb, r = read_log(sys.argv[1])
    c1 = time.process_time()
    n0, u = stages_and_u(inv, xd, xb, r, u_xd, u_xb, u_r2(r))
    c2 = time.process_time()
    ok = np.isfinite(n0)
    write_rows(sys.argv[2], run, t, n0, u, np.where(ok, "ok", "not-ok"), r / (r + 1.0))
    c3 = time.process_time()
    print(f"numpy {name} peer: {xd.size} rows ({ok.sum()} ok); CPU table {setup:.3f} s, read "
          f"{c1 - c0:.3f} s, compute {c2 - c1:.3f} s, write {c3 - c2:.3f} s", file=sys.stderr)

if __name__ == "__main__":
    main()
