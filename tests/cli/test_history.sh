# `stagecal history`: usage errors (exit 2, one line on stderr) and the demo logs end to
# end. The demo's stated law (datasets/demo/README.md, written by tests/tool_demodata.c)
# is the outside truth: a loss of 9.5 x 0.012 x (1 - e^-2.7) = 0.1061 stages a month at
# R = 3, F = 1.3 before the repack, and a repack that restores the fresh bed exactly.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3
C="$ROOT/datasets/columns/demo_benzene_toluene.json"
EV="$ROOT/datasets/demo/events.csv"
L="$ROOT/datasets/demo/logs"
X="$BIN history"
expect_exit 2 "option '--column FILE' is required" -- $X "$L/2025-01.csv" --reflux 3
expect_exit 2 "at least one run log is required" -- $X --column "$C" --reflux 3
expect_exit 2 "option '--reflux' is required" -- $X --column "$C" "$L/2025-01.csv"
expect_exit 2 "option '--margin': 2 is outside (0, 1)" -- $X --column "$C" "$L/2025-01.csv" --reflux 3 --margin 2
expect_exit 2 "is not RUN=REASON" -- $X --column "$C" "$L/2025-01.csv" --reflux 3 --exclude-run K7-018
expect_exit 2 "option '--now': 'soon' is not a date" -- $X --column "$C" "$L/2025-01.csv" --reflux 3 --now soon
expect_exit 2 "'--f-factor F' is required" -- $X --column "$C" "$L/2025-01.csv" --reflux 3 --form saturating-load
expect_exit 66 "" -- $X --column "$C" "$tmp/none.csv" --reflux 3
expect_exit 0 "" -- $X --help

# the whole demo, JSON
if ! $X --column "$C" "$L"/*.csv --events "$EV" --reflux 3 --f-factor 1.3 --require 7.5 \
    --design-hetp 0.6 --exclude-run "K7-018=analyser drift (check)" --json >"$tmp/h.json" 2>"$tmp/err"; then
    echo "FAIL: history on the demo logs"; cat "$tmp/err"; fails=$((fails + 1))
fi
if $PY - "$tmp/h.json" <<'PYEOF'
import json, sys
d = json.load(open(sys.argv[1]))
seg = d["segments"]
assert len(seg) == 2, seg
loss = seg[0]["loss_per_month"]
# the interval holds the demo's true loss rate
assert loss["determined"] and loss["low"] <= 0.1061 <= loss["high"], loss
ev = d["last_event"]
assert ev["vs_old_bed"]["verdict"] == "equivalent", ev["vs_old_bed"]
assert ev["vs_design"]["verdict"] in ("equivalent", "better", "not-shown"), ev["vs_design"]
assert d["excluded_runs"][0]["run"] == "K7-018" and d["excluded_runs"][0]["windows"] >= 1
assert d["now"]["stages"]["determined"]
assert "Caution" in d["caution"]
def walk(x):  # no absurd numbers anywhere
    if isinstance(x, dict):
        for v in x.values(): walk(v)
    elif isinstance(x, list):
        for v in x: walk(v)
    elif isinstance(x, float):
        assert abs(x) < 1e6, x
walk(d)
PYEOF
then echo "ok: demo history JSON"; else echo "FAIL: demo history JSON"; fails=$((fails + 1)); fi
# a single quarter: the crossing band is open and said so in words
$X --column "$C" "$L"/2025-0[1-3].csv --reflux 3 --f-factor 1.3 --require 7.5 >"$tmp/q.txt" 2>&1
if grep -q "the band is open" "$tmp/q.txt" && grep -q "Caution" "$tmp/q.txt"; then
    echo "ok: open band in words"
else
    echo "FAIL: open band"; cat "$tmp/q.txt"; fails=$((fails + 1))
fi
finish
