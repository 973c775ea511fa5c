# The stage convention, the column-id rule and the column warnings are one rule each,
# whatever command asks: a partial condenser gives the same column stages in single-point
# `invert --column` and in run-log mode; a bad column id is refused by the column reader
# (exit 65) in every command that reads the column; the Antoine-range warning reaches
# check, invert, calibrate (its output and the model file) and report.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3

# A partial-condenser copy of the constant-alpha demo column (alpha 2.5).
sed 's/"condenser": "total"/"condenser": "partial"/' "$ROOT/datasets/columns/demo_alpha.json" >"$tmp/partial.json"
cat >"$tmp/log.csv" <<'LOG'
time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-],V[kmol/h]
0,10,0.95,0.5,inf,1.2
0.25,10,0.96,0.5,inf,1.2
0.5,10,0.96,0.49,3,1.2
0.75,9.8,0.95,0.48,3,1.2
1.0,9.6,0.95,0.47,3,1.2
1.25,9.4,0.80,0.50,inf,1.2
LOG

pycheck() { # pycheck NAME PYTHON-STATEMENTS (exit 0 = pass)
    if "$PY" -c "$2"; then echo "ok: $1"; else echo "FAIL: $1"; fails=$((fails + 1)); fi
}

# Fenske at total reflux, alpha 2.5, xD 0.95, xB 0.5 (Fenske 1932, Ind. Eng. Chem. 24, 482):
# stages = ln((0.95/0.05)/(0.5/0.5)) / ln 2.5 = 3.2133622; a partial condenser is one
# equilibrium stage and the pot another (textbook McCabe-Thiele convention, from memory),
# so column stages = stages - 2 = 1.2133622. Tolerance 1e-7: the inversion round-trips to 1e-9.
"$BIN" invert --column "$tmp/partial.json" --xd 0.95 --xb 0.5 --reflux inf --json >"$tmp/single.json"
pycheck "invert --column partial: column stages = Fenske - 2" "
import json, math, sys
d = json.load(open('$tmp/single.json'))
n = math.log(19.0) / math.log(2.5)
sys.exit(0 if abs(d['stages'] - n) < 1e-7 and abs(d['column_stages'] - (n - 2)) < 1e-7
         and d['condenser'] == 'partial' and 'stages - 2' in d['stage_convention'] else 1)"

# Run-log mode on the same column: every row's column stages equal single-point mode's
# (the CSV carries 6 decimals: tolerance 6e-7); a row below 2 stages has none (empty).
"$BIN" invert --column "$tmp/partial.json" --quiet "$tmp/log.csv" >"$tmp/rows.csv"
i=0
ok=1
while IFS=, read -r t w xd xb r v; do
    i=$((i + 1))
    [ "$i" -eq 1 ] && continue
    "$BIN" invert --column "$tmp/partial.json" --xd "$xd" --xb "$xb" --reflux "$r" --json >"$tmp/s$i.json"
    "$PY" -c "
import csv, json, sys
rows = list(csv.DictReader(open('$tmp/rows.csv')))
row = [x for x in rows if x['line'] == '$i'][0]
d = json.load(open('$tmp/s$i.json'))
if d['column_stages'] is None:
    sys.exit(0 if row['column_stages'] == '' else 1)
cs = float(row['column_stages'])
sys.exit(0 if cs >= 0 and abs(cs - d['column_stages']) < 6e-7
         and abs(float(row['stages']) - 2 - cs) < 2e-6 else 1)" || { ok=0; echo "row $i differs"; }
done <"$tmp/log.csv"
if [ "$ok" -eq 1 ]; then echo "ok: partial condenser: run-log rows = single-point column stages"; else echo "FAIL: partial condenser rows"; fails=$((fails + 1)); fi
pycheck "partial condenser: a row under 2 stages has no column stages, never a negative one" "
import csv, sys
rows = list(csv.DictReader(open('$tmp/rows.csv')))
last = [x for x in rows if x['line'] == '7'][0]
neg = [x for x in rows if x['column_stages'] and float(x['column_stages']) < 0]
sys.exit(0 if last['status'] == 'ok' and float(last['stages']) < 2 and last['column_stages'] == ''
         and not neg else 1)"
"$BIN" invert --column "$tmp/partial.json" --json --quiet "$tmp/log.csv" >"$tmp/sum.json"
pycheck "invert run-log JSON names the partial-condenser convention" "
import json, sys
d = json.load(open('$tmp/sum.json'))
sys.exit(0 if d['condenser'] == 'partial' and 'stages - 2' in d['stage_convention'] else 1)"

# Column ids that would name another folder are refused by the column reader, exit 65,
# in every command that reads the column (they used to pass check and calibrate --dry-run).
for id in .. . .hidden ../x 'a/b' ''; do
    sed "s|\"id\": \"demo-alpha-T-101\"|\"id\": \"$id\"|" "$ROOT/datasets/columns/demo_alpha.json" >"$tmp/badid.json"
    expect_exit 65 "member 'id'" -- "$BIN" invert --column "$tmp/badid.json" --xd 0.9 --xb 0.5 --reflux 3
    expect_exit 65 "member 'id'" -- "$BIN" invert --column "$tmp/badid.json" "$tmp/log.csv"
    expect_exit 65 "member 'id'" -- "$BIN" check --column "$tmp/badid.json" "$tmp/log.csv"
    expect_exit 65 "member 'id'" -- "$BIN" calibrate --dry-run --column "$tmp/badid.json" "$tmp/log.csv"
done

# The Antoine-range warning (benzene's set stops at 354.07 K, the bubble curve at
# 101.325 kPa reaches toluene's boiling point) is data on the column: check and invert
# print it, calibrate shows it and writes it into the model file.
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
LOGS="$ROOT/datasets/demo/logs/2025-01.csv $ROOT/datasets/demo/logs/2025-02.csv $ROOT/datasets/demo/logs/2025-03.csv"
W="outside the stated range of the Antoine set of benzene"
expect_exit 0 "$W" -- "$BIN" check --column "$COL" "$ROOT/tests/badinput/good.csv"
expect_exit 0 "$W" -- "$BIN" invert --column "$COL" --xd 0.9 --xb 0.5 --reflux 3
"$BIN" calibrate --column "$COL" --fits "$tmp/fits" --form saturating $LOGS >"$tmp/cal.txt" 2>/dev/null
if grep -qF "warning: column demo-bt-K-7: the bubble curve" "$tmp/cal.txt" && grep -qF "$W" "$tmp/cal.txt"; then
    echo "ok: calibrate output shows the Antoine warning"
else
    echo "FAIL: calibrate output lacks the Antoine warning"; fails=$((fails + 1))
fi
pycheck "the model file carries the Antoine warning" "
import glob, json, sys
f = glob.glob('$tmp/fits/demo-bt-K-7/*.json')
d = json.load(open(f[0]))
sys.exit(0 if len(f) == 1 and any('$W' in w for w in d['warnings']) else 1)"
"$BIN" calibrate --column "$COL" --fits "$tmp/fits2" --form saturating --json --quiet $LOGS >"$tmp/cal.json"
pycheck "calibrate --json lists the Antoine warning" "
import json, sys
d = json.load(open('$tmp/cal.json'))
sys.exit(0 if any('$W' in w for w in d['warnings']) else 1)"
finish
