# `trend` does not count the same run logs twice (docs/cli.md, "stagecal trend"): on the
# invented demo data, a two-month fit (January + February 2025) followed by the two
# monthly fits. The rule, newest time of fit first, keeps a fit whose run logs (SHA-256,
# rows > 0) no kept fit has read: February is kept, then January (disjoint from
# February), and the older two-month fit shares 2025-02.csv with February, the newest
# kept fit it overlaps, so it is set aside with one warning. The column file, an input
# of all three fits with rows = 0, does not count. With --all-fits every file is a point.
# The expectations below follow from that rule, not from a run of the program.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
JAN="$ROOT/datasets/demo/logs/2025-01.csv"
FEB="$ROOT/datasets/demo/logs/2025-02.csv"
FITS="$tmp/fits"

check() { # check NAME PYTHON-EXPR-ON-d (d = the JSON in $tmp/j)
    if "$PY" -c "import json,sys; d=json.load(open('$tmp/j')); sys.exit(0 if ($2) else 1)"; then
        echo "ok: $1"
    else
        echo "FAIL: $1"; head -c 3000 "$tmp/j"; fails=$((fails + 1))
    fi
}
model_of() { # the model file a calibrate --json run wrote
    "$PY" -c "import json; print(json.load(open('$1'))['model_file'])"
}

# Written in this order; fits within one second share a time stamp and the writer names
# them NAME.json, NAME-2.json, …, which the rule ranks in that (write) order.
# (the constant form: February has two quasi-steady windows, too few for two parameters)
fit() { "$BIN" calibrate --quiet --form constant --json --column "$COL" --fits "$FITS" "$@"; }
fit "$JAN" "$FEB" >"$tmp/c1" || { echo "FAIL: calibrate Jan+Feb"; fails=$((fails + 1)); }
fit "$JAN" >"$tmp/c2" || { echo "FAIL: calibrate Jan"; fails=$((fails + 1)); }
fit "$FEB" >"$tmp/c3" || { echo "FAIL: calibrate Feb"; fails=$((fails + 1)); }
BOTH=$(model_of "$tmp/c1")
FEBFIT=$(model_of "$tmp/c3")

T="$BIN trend demo-bt-K-7 --fits $FITS --reflux 3 --f-factor 1.3"
$T --json >"$tmp/j" 2>"$tmp/err"
rc=$?
if [ "$rc" -eq 0 ]; then echo "ok: trend exit 0"; else echo "FAIL: trend exit $rc"; cat "$tmp/err"; fails=$((fails + 1)); fi
check "trend: 2 points (the two monthly fits)" "len(d['columns'][0]['fits']) == 2"
check "trend: the points are the monthly fits" \
      "'$BOTH' not in [f['path'] for f in d['columns'][0]['fits']]"
check "trend: one fit set aside, the two-month fit" \
      "[s['path'] for s in d['columns'][0]['superseded']] == ['$BOTH']"
check "trend: superseded by the February fit" "d['columns'][0]['superseded'][0]['by'] == '$FEBFIT'"
check "trend: the shared log is 2025-02.csv, not the column file" \
      "d['columns'][0]['superseded'][0]['shared_input']['path'] == '$FEB'"
check "trend: the rule is named" "d['selection']['rule'] == 'newest-wins'"
n=$(grep -c "warning: .*superseded by the newer fit" "$tmp/err")
if [ "$n" -eq 1 ] && grep -qF "$BOTH: superseded by the newer fit $FEBFIT" "$tmp/err"; then
    echo "ok: one warning naming both fits"
else
    echo "FAIL: $n superseded warnings"; cat "$tmp/err"; fails=$((fails + 1))
fi

# Human output says it too (stdout, so --quiet does not hide it).
$T --quiet >"$tmp/out" 2>"$tmp/err"
if grep -q "^column demo-bt-K-7: 2 fits (1 more set aside" "$tmp/out" && [ ! -s "$tmp/err" ]; then
    echo "ok: text output counts 2 fits and 1 set aside; --quiet silences the warning"
else
    echo "FAIL: text output"; cat "$tmp/out" "$tmp/err"; fails=$((fails + 1))
fi

# --all-fits: every model file is a point, no warning about shared logs.
$T --all-fits --json >"$tmp/j" 2>"$tmp/err"
check "--all-fits: 3 points" "len(d['columns'][0]['fits']) == 3"
check "--all-fits: nothing set aside" "d['columns'][0]['superseded'] == []"
check "--all-fits: the rule is named" "d['selection']['rule'] == 'all-fits'"
if grep -q "superseded" "$tmp/err"; then echo "FAIL: --all-fits warned"; fails=$((fails + 1)); else
    echo "ok: --all-fits does not warn"; fi
finish
