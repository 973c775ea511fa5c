#!/usr/bin/python3
"""vle_crosscheck.py - an independent implementation of the stagecal VLE models
(Antoine in the NIST WebBook form, ideal Raoult, NRTL with T-dependent tau, modified
Raoult with an ideal vapour) solved with scipy.optimize.brentq, used as the oracle for
tests/test_vle.c and to generate datasets/reference/vle/.

Shares no code with src/vle.c. Usage:
  vle_crosscheck.py bubble    lines "<system> <x> <T_K> <y>" on a grid of x
  vle_crosscheck.py inverse   lines "<system> <y> <x>" on a grid of y (x*(y))
  vle_crosscheck.py table     the tabulated x-y-T data set (CSV) on stdout
  vle_crosscheck.py check     model values (CSV) between the table's points
Systems: ideal = benzene-toluene (Raoult), nrtl = ethanol-water NRTL-A, both at
101325 Pa; constants: Antoine sets of the NIST Chemistry WebBook (benzene and toluene after
Williamham, Taylor, Pignocco & Rossini 1945; ethanol after Ambrose & Sprake 1970; water
after Bridgeman & Aldrich 1964), NRTL-A after Gmehling & Onken 1977 (DECHEMA Chemistry
Data Series I/1; source secondary, primary table not verified).
"""
import math
import sys

from scipy.optimize import brentq

P = 101325.0
ANT = {
    "benzene": (4.01814, 1203.835, -53.226),
    "toluene": (4.07827, 1343.943, -53.773),
    "ethanol": (5.24677, 1598.673, -46.424),
    "water": (5.08354, 1663.125, -45.622),  # Bridgeman & Aldrich 1964
}
NRTL_A = (-0.8009, 246.18, 3.4578, -586.0809, 0.3)  # tau12 = a + b/T, tau21, alpha


def psat(name, t):
    a, b, c = ANT[name]
    return 1e5 * 10.0 ** (a - b / (t + c))


def gammas_nrtl(x1, t):
    a12, b12, a21, b21, al = NRTL_A
    t12, t21 = a12 + b12 / t, a21 + b21 / t
    g12, g21 = math.exp(-al * t12), math.exp(-al * t21)
    x2 = 1.0 - x1
    l1 = x2 * x2 * (t21 * (g21 / (x1 + x2 * g21)) ** 2 + t12 * g12 / (x2 + x1 * g12) ** 2)
    l2 = x1 * x1 * (t12 * (g12 / (x2 + x1 * g12)) ** 2 + t21 * g21 / (x1 + x2 * g21) ** 2)
    return math.exp(l1), math.exp(l2)


SYSTEMS = {
    "ideal": ("benzene", "toluene", lambda x, t: (1.0, 1.0)),
    "nrtl": ("ethanol", "water", gammas_nrtl),
}


def bubble(system, x):
    light, heavy, gam = SYSTEMS[system]

    def f(t):
        g1, g2 = gam(x, t)
        return x * g1 * psat(light, t) + (1 - x) * g2 * psat(heavy, t) - P

    t = brentq(f, 300.0, 420.0, xtol=1e-13, rtol=1e-15, maxiter=200)
    g1, g2 = gam(x, t)
    s1 = x * g1 * psat(light, t)
    s2 = (1 - x) * g2 * psat(heavy, t)
    return t, s1 / (s1 + s2)


def inverse(system, y):
    return brentq(lambda x: bubble(system, x)[1] - y, 0.0, 1.0, xtol=1e-15, rtol=1e-15,
                  maxiter=200)


# The tabulated set: x nodes a process engineer might tabulate (denser at the ends).
TABLE_X = [0.0, 0.005, 0.01, 0.02, 0.03, 0.05, 0.075, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4,
           0.45, 0.5, 0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 0.975, 1.0]


def main():
    mode = sys.argv[1] if len(sys.argv) > 1 else "bubble"
    if mode == "bubble":
        for system in ("ideal", "nrtl"):
            for i in range(0, 41):
                x = i / 40.0
                if 0 < i < 40:
                    x = 0.5 - 0.5 * math.cos(math.pi * i / 40.0) + 0.0123 * (i % 3 == 1) / 40
                t, y = bubble(system, x)
                print("%s %.17g %.17g %.17g" % (system, x, t, y))
    elif mode == "inverse":
        for system in ("ideal", "nrtl"):
            for i in range(1, 40):
                y = i / 40.0 + 0.00371
                print("%s %.17g %.17g" % (system, y, inverse(system, y)))
    elif mode == "table":
        print("x,y,T_K")
        for x in TABLE_X:
            t, y = bubble("nrtl", x)
            print("%.6f,%.6f,%.3f" % (x, y, t))
    elif mode == "check":
        print("x,y,T_K")
        for a, b in zip(TABLE_X, TABLE_X[1:]):
            x = 0.5 * (a + b)
            t, y = bubble("nrtl", x)
            print("%.10f,%.10f,%.6f" % (x, y, t))
    else:
        sys.exit("usage: vle_crosscheck.py bubble|inverse|table|check")


if __name__ == "__main__":
    main()
