#!/usr/bin/env python3
"""Invented 10-minute historian scenario (issue 16): INVENTED DEMO DATA, not plant data.

Rewrites the invented demo logs (datasets/demo/logs, made by tests/tool_demodata.c) the way
a plant historian exports them: the first four batches of each month in one file per month,
no run column, holdup in kg with load-cell noise (Gaussian, sd 10 kg, rounded to 1 kg),
compositions in wt%, reboiler duty in kW instead of boil-up, top pressure in mbar, the top
temperature in degC (the bubble point of the distillate at the logged pressure, Raoult's
law with the column file's Antoine sets), local timestamps "YYYY-MM-DD hh:mm".
dialect "semicolon": ';' separator and decimal comma (a European spreadsheet export);
dialect "comma": ',' and a decimal point.

usage: historian_scenario.py COLUMN.json LOGDIR OUTDIR DIALECT MONTH...
"""
import csv
import json
import math
import random
import sys


def main():
    col_path, logdir, outdir, dialect = sys.argv[1:5]
    months = sys.argv[5:]
    col = json.load(open(col_path))
    sysd = col["system"]
    ml = sysd["light"]["molar_mass_kg_mol"]
    mh = sysd["heavy"]["molar_mass_kg_mol"]
    al, ah = sysd["light"]["antoine"], sysd["heavy"]["antoine"]
    lam = sysd["latent_heat_j_mol"]
    rng = random.Random(20261202)
    sep = ";" if dialect == "semicolon" else ","

    def num(x, nd):
        s = "%.*f" % (nd, x)
        return s.replace(".", ",") if sep == ";" else s

    def wt(x):  # mole fraction of the light component -> wt% of it
        return 100.0 * x * ml / (x * ml + (1 - x) * mh)

    def psat_pa(a, t_k):  # NIST WebBook form: log10(P/bar) = A - B/(T + C)
        return 1e5 * 10 ** (a["a"] - a["b"] / (t_k + a["c"]))

    def bubble_c(x, p_pa):  # Raoult: x·Psat_l + (1 − x)·Psat_h = P, by bisection
        lo, hi = 300.0, 420.0
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            f = x * psat_pa(al, mid) + (1 - x) * psat_pa(ah, mid) - p_pa
            lo, hi = (lo, mid) if f > 0 else (mid, hi)
        return 0.5 * (lo + hi) - 273.15

    for month in months:
        rows = list(csv.DictReader(open("%s/%s.csv" % (logdir, month))))
        runs = []
        for r in rows:
            if r["run"] not in runs:
                runs.append(r["run"])
        keep = set(runs[:4])
        with open("%s/%s.csv" % (outdir, month), "w", newline="") as out:
            w = csv.writer(out, delimiter=sep, lineterminator="\n")
            w.writerow(["time[iso8601]", "W[kg]", "xD[wt%]", "xB[wt%]", "R[-]", "Q[kW]",
                        "P[mbar]", "T_top[C]"])
            for r in rows:
                if r["run"] not in keep:
                    continue
                def val(k):  # a blank cell stays blank (a missing value)
                    return float(r[k]) if r[k] else None

                xd, xb = val("xD[mol/mol]"), val("xB[mol/mol]")
                wk, vk, pk = val("W[kmol]"), val("V[kmol/h]"), val("P[kPa]")
                p_pa = pk * 1000 if pk is not None else 101325.0
                w_kg = q_kw = None
                if wk is not None and xb is not None:
                    w_kg = round(wk * 1000 * (xb * ml + (1 - xb) * mh) + rng.gauss(0, 10))
                if vk is not None:
                    q_kw = vk / 3.6 * lam / 1000
                t = r["time[iso8601]"].replace("T", " ")[:16]

                def cell(x, f):
                    return "" if x is None else f(x)

                w.writerow([t, cell(w_kg, lambda v: "%d" % v),
                            cell(xd, lambda v: num(min(wt(v), 100.0), 3)),
                            cell(xb, lambda v: num(wt(v), 3)), r["R[-]"],
                            cell(q_kw, lambda v: num(v, 2)),
                            cell(pk, lambda v: num(v * 10, 1)),
                            cell(xd, lambda v: num(bubble_c(v, p_pa), 2))])


if __name__ == "__main__":
    main()
