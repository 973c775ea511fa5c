#!/bin/sh
# test_softsensor.sh — compositions from temperatures through the binary (docs/runlog.md
# "Compositions from temperatures"): `check` counts what it inferred and names a sensor that
# disagrees with the lab samples; `invert` marks each composition's source in its CSV and JSON;
# `calibrate` counts the inferred rows and carries the warning; --no-infer switches it off.
# The log's temperatures come from an independent Raoult solve (python3, Newton on the NIST
# WebBook Antoine sets for benzene–toluene), not from the library.
# Usage: sh test_softsensor.sh <stagecal-binary> <repo-root>
set -u
bin=$1
root=$2
tmp=$(dirname "$bin")/test_softsensor.tmp
rm -rf "$tmp" && mkdir -p "$tmp" || exit 1
fails=0
fail() { echo "FAIL $1"; fails=$((fails + 1)); }

cat >"$tmp/col.json" <<'JSON'
{"format": "stagecal-column", "version": 1, "id": "soft-cli",
 "description": "INVENTED: a column for the soft-sensor CLI test",
 "condenser": "total", "pressure_pa": 101325,
 "system": {"light": {"name": "benzene", "molar_mass_kg_mol": 0.078112,
   "antoine": {"a": 4.01814, "b": 1203.835, "c": -53.226}},
  "heavy": {"name": "toluene", "molar_mass_kg_mol": 0.092138,
   "antoine": {"a": 4.07827, "b": 1343.943, "c": -53.773}},
  "latent_heat_j_mol": 32000, "model": {"kind": "ideal"}},
 "uncertainty": {"xd": 0.002, "xb": 0.002, "t_top": 0.1, "t_pot": 0.1}}
JSON

# 40 rows of one run at R = 3: xB falls from 0.40, xD = 0.9; lab samples in rows 5 and 30.
# $1: offset on T_pot [K]
make_log() {
    /usr/bin/python3 - "$1" <<'PY'
import math, sys
off = float(sys.argv[1])
A = ((4.01814, 1203.835, -53.226), (4.07827, 1343.943, -53.773))
def ps(k, t): a, b, c = A[k]; return 1e5 * 10 ** (a - b / (t + c))
def tb(x, p=101325.0):
    t = 360.0
    for _ in range(100):
        f = x * ps(0, t) + (1 - x) * ps(1, t) - p
        d = sum(w * ps(k, t) * math.log(10) * A[k][1] / (t + A[k][2]) ** 2
                for k, w in ((0, x), (1, 1 - x)))
        t -= f / d
        if abs(f / d) < 1e-12: break
    return t
def td(y, p=101325.0):  # dew point: bisection on the liquid in equilibrium
    lo, hi = 0.0, 1.0
    for _ in range(80):
        x = (lo + hi) / 2
        t = tb(x, p)
        if x * ps(0, t) / p < y: lo = x
        else: hi = x
    return tb((lo + hi) / 2, p)
print("time[min],W[mol],xD[mol/mol],xB[mol/mol],R[-],T_top[K],T_pot[K]")
for i in range(40):
    xb = 0.40 - 0.002 * i
    lab = i in (5, 30)
    print("%d,%.3f,%s,%s,3,%.5f,%.5f" % (i, 100 - 0.5 * i, "0.9" if lab else "",
          "%.6f" % xb if lab else "", td(0.9), tb(xb) + off))
PY
}
make_log 0 >"$tmp/log.csv" || exit 1
make_log 1 >"$tmp/off.csv" || exit 1

"$bin" check --column "$tmp/col.json" "$tmp/log.csv" >"$tmp/out" 2>"$tmp/err" || fail "check exit $?"
grep -qF "stagecal check: compositions from temperatures: xD inferred in 38 rows (0 censored), xB in 38 (0 censored); sensors checked against the analyser readings in 2 run(s), 0 inconsistent" "$tmp/err" ||
    { fail "check summary"; cat "$tmp/err"; }
"$bin" check --column "$tmp/col.json" --json "$tmp/log.csv" >"$tmp/out" 2>"$tmp/err"
/usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1]))["inferred"]; sys.exit(0 if (d["xd"],d["xb"],d["sensor_inconsistent"])==(38,38,0) else 1)' "$tmp/out" ||
    { fail "check --json inferred"; cat "$tmp/out"; }

# a +1 K offset on the pot sensor: a warning names it (exit 0: a warning, not an error)
"$bin" check --column "$tmp/col.json" "$tmp/off.csv" >"$tmp/out" 2>&1 || fail "check offset exit $?"
grep -qF "T_pot reads +1.00 K" "$tmp/out" || { fail "offset warning"; cat "$tmp/out"; }

# invert: the CSV says where each composition came from
"$bin" invert --column "$tmp/col.json" -o "$tmp/inv.csv" "$tmp/log.csv" 2>"$tmp/err" || fail "invert exit $?"
head -1 "$tmp/inv.csv" | grep -qF ",xD[mol/mol],xD_source,u_xD,xB[mol/mol],xB_source,u_xB,xD_fused[mol/mol],u_xD_fused,xB_fused[mol/mol],u_xB_fused" ||
    fail "invert header"
[ "$(grep -c ',analyser,' "$tmp/inv.csv")" -eq 2 ] || fail "two analyser rows"
[ "$(grep -c ',inferred,' "$tmp/inv.csv")" -eq 38 ] || fail "38 inferred rows"
"$bin" invert --column "$tmp/col.json" --json -o "$tmp/inv2.csv" "$tmp/log.csv" >"$tmp/out" 2>/dev/null
/usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1]))["inferred"]; sys.exit(0 if d["xb"]==38 else 1)' "$tmp/out" ||
    fail "invert --json inferred"

# --no-infer: the temperatures give nothing, the blanks stay missing
"$bin" invert --column "$tmp/col.json" --no-infer -o "$tmp/inv3.csv" "$tmp/log.csv" 2>/dev/null
head -1 "$tmp/inv3.csv" | grep -qF "xD_source" && fail "--no-infer still marks sources"
[ "$(grep -c 'missing xD' "$tmp/inv3.csv")" -eq 38 ] || fail "--no-infer: 38 rows missing xD"

[ "$fails" -eq 0 ] && rm -rf "$tmp"
[ "$fails" -eq 0 ]
