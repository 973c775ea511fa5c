# `stagecal fits`: fits named by data period, found by period or label, labelled, retired
# with a reason and restored, and a fit whose data period straddles the demo's repack
# (2025-10-06, datasets/demo/events.csv) flagged.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
C="$ROOT/datasets/columns/demo_benzene_toluene.json"
L="$ROOT/datasets/demo/logs"
F="$tmp/fits"
for m in 2025-08 2025-09 2025-11; do
    $BIN calibrate --quiet --fits "$F" --form saturating --column "$C" "$L/$m.csv" >/dev/null 2>&1
done
$BIN calibrate --quiet --fits "$F" --form saturating --column "$C" "$L/2025-09.csv" "$L/2025-10.csv" "$L/2025-11.csv" >/dev/null 2>&1
X="$BIN fits"
expect_exit 2 "expected list, find, label, retire or restore" -- $X frob demo-bt-K-7 --fits "$F"
expect_exit 2 "'fits find' takes 2 argument(s)" -- $X find demo-bt-K-7 --fits "$F"
expect_exit 2 "needs '--reason TEXT'" -- $X retire demo-bt-K-7 2025-08 --fits "$F"
expect_exit 66 "cannot open" -- $X list demo-bt-K-7 --fits "$tmp/none"
expect_exit 0 "" -- $X find demo-bt-K-7 2025-08 --fits "$F"
grep -q "demo-bt-K-7/" "$tmp/out" || { echo "FAIL: find printed no path"; fails=$((fails + 1)); }
expect_exit 65 "names 4 fits" -- $X find demo-bt-K-7 2025 --fits "$F"
# the three-month fit, by its own name (its period depends on which windows qualify)
$X list demo-bt-K-7 --fits "$F" >"$tmp/list0"
three=$(grep -o 'demo-bt-K-7@2025-09-[0-9]*\.\.2025-11-[0-9]*' "$tmp/list0" | head -1)
expect_exit 0 "" -- $X label demo-bt-K-7 "$three" autumn --fits "$F"
expect_exit 0 "" -- $X find demo-bt-K-7 autumn --fits "$F"
expect_exit 2 "" -- $X label demo-bt-K-7 2025-08 "bad label" --fits "$F"
expect_exit 0 "" -- $X retire demo-bt-K-7 2025-08 --reason "analyser recalibrated" --fits "$F"
expect_exit 65 "no live fit" -- $X find demo-bt-K-7 2025-08 --fits "$F"
expect_exit 0 "" -- $X list demo-bt-K-7 --fits "$F" --events "$ROOT/datasets/demo/events.csv"
grep -q "RETIRED: analyser recalibrated" "$tmp/out" || { echo "FAIL: retirement not listed"; fails=$((fails + 1)); }
grep -q "autumn.*STRADDLES the repack" "$tmp/out" || { echo "FAIL: straddling fit not flagged"; cat "$tmp/out"; fails=$((fails + 1)); }
expect_exit 0 "" -- $X restore demo-bt-K-7 demo-bt-K-7@2025-08-08..2025-08-30 --fits "$F"
expect_exit 0 "" -- $X find demo-bt-K-7 2025-08 --fits "$F"
# trend leaves out a retired fit and one that straddles the repack, each with a warning
$X retire demo-bt-K-7 2025-08 --reason "analyser recalibrated" --fits "$F" >/dev/null
$BIN trend demo-bt-K-7 --fits "$F" --events "$ROOT/datasets/demo/events.csv" --reflux 3 \
    --f-factor 1.3 >"$tmp/t.out" 2>"$tmp/t.err"
if grep -q "retired (analyser recalibrated); not trended" "$tmp/t.err" &&
    grep -q "straddles the repack of 2025-10-06" "$tmp/t.err"; then
    echo "ok: trend sets aside retired and straddling fits"
else
    echo "FAIL: trend did not set aside"; cat "$tmp/t.err"; fails=$((fails + 1))
fi
finish
