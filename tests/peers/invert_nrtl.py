#!/usr/bin/python3
"""Peer of `stagecal invert` for an NRTL model (ethanol-water at 101.325 kPa, the model
of datasets/columns/kestrel_c3_ethanol_water.json), written the way a numpy programmer
who has profiled would: the bubble curve is tabulated once (vectorised Newton on T over
a dense grid), every row is stepped at once with numpy.interp on that table, and the
uncertainty comes from central finite differences (six more vectorised inversions).

    usage: invert_nrtl.py LOG.csv OUT.csv

Model: gamma-phi with an ideal vapour, P = x1 g1 P1(T) + x2 g2 P2(T), Antoine
log10(P/bar) = A - B/(T + C) (ethanol: Ambrose & Sprake 1970, water: Bridgeman &
Aldrich 1964, as given by the NIST Chemistry WebBook), NRTL (Renon & Prausnitz 1968)
with tau12 = -0.8009 + 246.18/T, tau21 = 3.4578 - 586.0809/T, alpha12 = 0.3.
Stepping and the fractional stage as in tests/peers/invert_alpha.py, with Smoker's count
of the crossing step taken at the local relative volatility of that step.
Uncertainty with the column's u_xD = 0.003, u_xB = 0.005, u_R = 0.1 (+) 0.02 R.
Prints the CPU time of tabulation, read, compute and write on stderr.
"""
import sys
import time

import numpy as np

from invert_alpha import run_peer, smoker_consts, step_rows

P_PA = 101325.0
ANT = ((5.24677, 1598.673, -46.424), (5.08354, 1663.125, -45.622))
NRTL = (-0.8009, 246.18, 3.4578, -586.0809, 0.3)
U_XD, U_XB, U_R, U_RREL = 0.003, 0.005, 0.1, 0.02
GRID = 8193


def bubble(x1):
    """Bubble T [K] and vapour y1 at liquid x1 (vectorised Newton on ln sum - ln P)."""
    x2 = 1.0 - x1
    a12, b12, a21, b21, al = NRTL

    def resid(t):
        t12, t21 = a12 + b12 / t, a21 + b21 / t
        g12, g21 = np.exp(-al * t12), np.exp(-al * t21)
        d1, d2 = x1 + x2 * g21, x2 + x1 * g12
        lg1 = x2 ** 2 * (t21 * (g21 / d1) ** 2 + t12 * g12 / d2 ** 2)
        lg2 = x1 ** 2 * (t12 * (g12 / d2) ** 2 + t21 * g21 / d1 ** 2)
        s1 = x1 * np.exp(lg1) * 1e5 * 10.0 ** (ANT[0][0] - ANT[0][1] / (t + ANT[0][2]))
        s2 = x2 * np.exp(lg2) * 1e5 * 10.0 ** (ANT[1][0] - ANT[1][1] / (t + ANT[1][2]))
        return np.log(s1 + s2) - np.log(P_PA), s1 / (s1 + s2)

    t = np.full(x1.shape, 360.0)
    for _ in range(50):
        f, _y = resid(t)
        df = (resid(t + 1e-4)[0] - f) / 1e-4
        step = f / df
        t -= step
        if np.max(np.abs(step)) < 1e-10:
            break
    return t, resid(t)[1]


def tabulate():
    i = np.arange(GRID)
    s = np.sin(0.5 * np.pi * np.minimum(i, GRID - 1 - i) / (GRID - 1)) ** 2
    xs = np.where(i <= (GRID - 1) // 2, s, 1.0 - s)
    _t, ys = bubble(xs)
    ys[0], ys[-1] = 0.0, 1.0
    g = ys - xs
    cross = np.flatnonzero((g[1:-2] > 0) & (g[2:-1] <= 0)) + 1
    x_az = xs[cross[0]] if cross.size else 2.0
    return xs, ys, x_az


def invert(tab, xd, xb, r):
    xs, ys, x_az = tab
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where(np.isinf(r), 1.0, r / (r + 1.0))
        b = np.where(np.isinf(r), 0.0, xd / (r + 1.0))
        xt = (np.interp(xb, xs, ys) - b) / m
        ok = (xb > 0) & (xb < xd) & (xd < x_az) & (r > 0) & (xt > 0)
        ok &= np.interp(xt, xs, ys) > m * xt + b  # no pinch at x_target

        def fraction(j, xp, xq, yq):
            alpha = yq * (1.0 - xq) / (xq * (1.0 - yq))  # local relative volatility
            k, beta, lna = smoker_consts(alpha, m[j], b[j])
            f = np.log((1.0 / (xt[j] - k) - beta) / (1.0 / (xp - k) - beta)) / lna
            return np.where(np.isfinite(f), f, (xp - xt[j]) / (xp - xq))

        return step_rows(xd, xt, m, b, ok, lambda y: np.interp(y, ys, xs), fraction)


def main():
    if len(sys.argv) < 3:
        sys.exit("usage: invert_nrtl.py LOG.csv OUT.csv")
    c0 = time.process_time()
    tab = tabulate()
    run_peer("nrtl", lambda a, b, c: invert(tab, a, b, c), U_XD, U_XB,
             lambda r: U_R ** 2 + (U_RREL * r) ** 2, time.process_time() - c0)

if __name__ == "__main__":
    main()
