#!/bin/sh
# test_probe.sh — `stagecal probe` on the command line: usage errors and missing inputs
# (exit 2 / 66, one line on stderr, nothing on stdout), and the JSON contract
# (docs/cli.md): K tests inside the ranges with a duration, the half-width before and
# after at every --at condition, `inf` in --at and in the reflux range. The numerics are
# tested in tests/test_design.c. Model files come from calibrating the invented demo logs.
#   sh test_probe.sh <stagecal-binary> <repo-root>
BIN=$1
ROOT=$2
py=/usr/bin/python3
TMPDIR=$(cd "$(dirname "$BIN")" && pwd)
export TMPDIR
. "$(dirname "$0")/lib.sh"

P="$BIN probe"
expect_exit 2 "a model file is required" -- $P --at 2
expect_exit 2 "option '--at' is required" -- $P m.json
expect_exit 2 "option '--at': 'x' is not a number" -- $P m.json --at 2,x
expect_exit 2 "option '--at': R = -1 is not positive" -- $P m.json --at -1
expect_exit 2 "option '--weights': 1 weights for 2 conditions" -- $P m.json --at 2,3 --weights 1
expect_exit 2 "option '--reflux-range': '2' is not a range" -- $P m.json --at 2 --reflux-range 2
expect_exit 2 "option '--criterion': 'a' is unknown" -- $P m.json --at 2 --criterion a
expect_exit 2 "option '--tests'" -- $P m.json --at 2 --tests 0
expect_exit 2 "option '--sample-interval': 0 is not positive" -- $P m.json --at 2 --sample-interval 0
expect_exit 2 "expected one model file" -- $P a.json b.json --at 2
expect_exit 66 "" -- $P "$tmp/no-such-model.json" --at 2
expect_exit 0 "" -- $P --help

BT=$ROOT/datasets/columns/demo_benzene_toluene.json
# --holdup none: with the lag compensation January's windows alone no longer determine b
"$BIN" calibrate --quiet --holdup none --fits "$tmp/fits" --form saturating --column "$BT" \
    "$ROOT/datasets/demo/logs/2025-01.csv" >/dev/null || { echo "FAIL: calibrate"; exit 1; }
M=$(ls "$tmp"/fits/*/*.json)
# (two months: January alone has four quasi-steady windows, too few for three parameters)
"$BIN" calibrate --quiet --fits "$tmp/fitsl" --form 'linear:1+1/R+F' --column "$BT" \
    "$ROOT/datasets/demo/logs/2025-01.csv" "$ROOT/datasets/demo/logs/2025-03.csv" >/dev/null ||
    { echo "FAIL: calibrate"; exit 1; }
ML=$(ls "$tmp"/fitsl/*/*.json)

expect_exit 2 "uses the vapour load" -- $P "$ML" --at 2
expect_exit 2 "reflux range" -- $P "$M" --at 2 --reflux-range 3:1
expect_exit 0 "" -- $P "$M" --at 2,2.5 --tests 3
grep -q "Caution" "$tmp/out" || { echo "FAIL: no caution line"; fails=$((fails + 1)); }

# JSON: the contract's members, K tests inside the ranges, after < before everywhere.
check_json() {
    "$@" >"$tmp/probe.json" 2>"$tmp/err" || { echo "FAIL: exit $?: $*"; cat "$tmp/err"; fails=$((fails + 1)); return; }
    if $py - "$tmp/probe.json" "$K" "$RLO" "$RHI" <<'PY'
import json, math, sys
d = json.load(open(sys.argv[1]))
k, lo = int(sys.argv[2]), float(sys.argv[3])
hi = math.inf if sys.argv[4] == "inf" else float(sys.argv[4])
r = lambda v: math.inf if v == "inf" else v
assert d["criterion"] in ("i", "d")
assert len(d["tests"]) == k, d["tests"]
for t in d["tests"]:
    assert lo <= r(t["reflux"]) <= hi, t
    assert t["duration_h"] > 0
    assert "f_factor" in t
for a in d["at"]:
    assert a["half_width_after"] < a["half_width_before"], a
    assert "f_factor" in a and "reflux" in a
assert "Caution" in d["caution"]
PY
    then echo "ok: $*"; else echo "FAIL: JSON contract: $*"; fails=$((fails + 1)); fi
}
K=4 RLO=1.5 RHI=inf check_json $P "$M" --at 2,inf --reflux-range 1.5:inf --json
K=2 RLO=1 RHI=6 check_json $P "$M" --at 2,2.5 --reflux-range 1:6 --tests 2 --criterion d --json
K=3 RLO=1.5 RHI=5 check_json $P "$ML" --at 2:1.3,2.5:1.2 --weights 2,1 --reflux-range 1.5:5 --f-factor-range 0.9:1.5 --tests 3 --json
# --compare: the band after as many windows at one condition, in the JSON's comparison.
"$BIN" probe "$M" --at 2,2.5 --compare 4.5 --json >"$tmp/cmp.json" 2>/dev/null
if $py -c "
import json, sys
d = json.load(open(sys.argv[1]))
c = d['comparison']
assert c['reflux'] == 4.5 and c['tests'] == len(d['tests'])
# the I-criterion is the weighted mean variance: the proposal is no worse on it
mean = lambda xs: sum(x * x for x in xs) / len(xs)
assert mean([b['half_width_after'] for b in d['at']]) <= mean([a['half_width_after'] for a in c['at']])
for a, b in zip(c['at'], d['at']):
    assert a['half_width_after'] <= b['half_width_before'], (a, b)
" "$tmp/cmp.json"; then echo "ok: --compare"; else echo "FAIL: --compare"; fails=$((fails + 1)); fi
expect_exit 2 "option '--compare'" -- $P "$M" --at 2 --compare -1
# The chart: an SVG document, and never over the model file it reads.
expect_exit 0 "" -- $P "$M" --at 2,2.5 --chart-out "$tmp/probe.svg" --quiet
grep -q "<svg" "$tmp/probe.svg" || { echo "FAIL: no SVG chart"; fails=$((fails + 1)); }
expect_exit 2 "option '--chart-out'" -- $P "$M" --at 2 --chart-out "$M"
# --column: no test above the column's flooding F-factor times its margin (docs/column-file.md)
$py -c "
import json, sys
c = json.load(open(sys.argv[1]))
c['flooding'] = {'f_factor': 1.6, 'margin': 0.8}
json.dump(c, open(sys.argv[2], 'w'))
" "$BT" "$tmp/flood.json"
expect_exit 2 "beyond the flooding margin" -- $P "$ML" --at 2:1.2 --f-factor-range 0.9:1.5 --column "$tmp/flood.json" --quiet
"$BIN" probe "$ML" --at 2:1.3,2.5:1.2 --tests 3 --column "$tmp/flood.json" --json >"$tmp/flood.out" 2>/dev/null
if $py -c "
import json, sys
d = json.load(open(sys.argv[1]))
assert len(d['tests']) == 3
for t in d['tests']:
    assert t['f_factor'] <= 1.28 + 1e-12, t
" "$tmp/flood.out"; then echo "ok: --column flooding"; else echo "FAIL: --column flooding"; fails=$((fails + 1)); fi
# run logs in place of a model file: the fit calibrate makes, so the same proposal
expect_exit 2 "run logs need option '--column'" -- $P "$ROOT/datasets/demo/logs/2025-01.csv" --at 2
expect_exit 2 "option '--form' is for run logs" -- $P "$M" --at 2 --form constant
"$BIN" probe "$ML" --at 2:1.3,2.5:1.2 --tests 2 --json >"$tmp/from_model.json" 2>/dev/null
"$BIN" probe --column "$BT" --form 'linear:1+1/R+F' "$ROOT/datasets/demo/logs/2025-01.csv" \
    "$ROOT/datasets/demo/logs/2025-03.csv" --at 2:1.3,2.5:1.2 --tests 2 --json \
    >"$tmp/from_logs.json" 2>/dev/null
if $py -c "
import json, sys
a, b = (json.load(open(f)) for f in sys.argv[1:3])
for x, y in zip(a['at'], b['at']):
    for k in ('half_width_before', 'half_width_after'):
        assert abs(x[k] - y[k]) <= 1e-9 * abs(x[k]), (k, x[k], y[k])
r = lambda v: float('inf') if v == 'inf' else v
for x, y in zip(a['tests'], b['tests']):
    assert r(x['reflux']) == r(y['reflux']) or abs(x['reflux'] - y['reflux']) <= 1e-6 * abs(x['reflux']), (x, y)
" "$tmp/from_model.json" "$tmp/from_logs.json"; then echo "ok: probe from run logs"; else echo "FAIL: probe from run logs"; fails=$((fails + 1)); fi
# A model clustered by run (calibrate --covariance cr2-run, three months, 18 runs): each
# condition's half-width takes t at its own contrast's dof (at most runs - 1 = 17, below the
# file's dof), one t per condition (information.t_before null), and the text says the
# after-values assume tests from separate batches (docs/design.md).
"$BIN" calibrate --quiet --fits "$tmp/fitsc" --form saturating --column "$BT" --covariance cr2-run \
    "$ROOT/datasets/demo/logs/2025-01.csv" "$ROOT/datasets/demo/logs/2025-02.csv" \
    "$ROOT/datasets/demo/logs/2025-03.csv" >/dev/null || { echo "FAIL: calibrate cr2-run"; exit 1; }
MC=$(ls "$tmp"/fitsc/*/*.json)
"$BIN" probe "$MC" --at 2,4,8 --json >"$tmp/clu.json" 2>/dev/null
if $py -c "
import json, sys
d = json.load(open(sys.argv[1]))
m = json.load(open(sys.argv[2]))
assert m['version'] == 5 and 'design_run' in m['correlation']
assert d['information']['t_before'] is None and d['information']['t_after'] is None
for a in d['at']:
    assert 1 <= a['dof_before'] <= 17 and a['dof_before'] < m['correlation']['dof'], a
    assert a['dof_after'] == a['dof_before'], a
" "$tmp/clu.json" "$MC"; then echo "ok: probe on a run-clustered model"; else echo "FAIL: probe on a run-clustered model"; fails=$((fails + 1)); fi
expect_exit 0 "" -- $P "$MC" --at 2,4
grep -q "tests come from separate batches" "$tmp/out" ||
    { echo "FAIL: probe text: no note on tests from one batch"; fails=$((fails + 1)); }
finish
