# Every chart kind of `stagecal plot` drawn from the demo data to PNG and to SVG: the PNG is
# a PNG, the SVG holds its labels as <text> elements (PLplot's svg device; decoded to plain
# UTF-8, so the words grep) with the labels each chart must show, and no glyph outlines;
# usage errors of the new kinds. What the charts are built from is tested in
# tests/test_plot.c; this is the command line end to end.
BIN=$1
SRC=$2
. "$(dirname "$0")/lib.sh"

COL=$SRC/datasets/columns/demo_benzene_toluene.json
L=$SRC/datasets/demo/logs
EV=$SRC/datasets/demo/events.csv

# check_chart NAME LABEL... : $tmp/NAME.png is a PNG; $tmp/NAME.svg has <text> with each LABEL
check_chart() {
    name=$1
    shift
    if [ "$(head -c 8 "$tmp/$name.png" | od -An -tx1 | tr -d ' \n')" != "89504e470d0a1a0a" ]; then
        echo "FAIL: $name.png is not a PNG"; fails=$((fails + 1)); return
    fi
    ntext=$(grep -c "<text" "$tmp/$name.svg")
    if [ "$ntext" -lt 5 ]; then
        echo "FAIL: $name.svg has $ntext <text> elements"; fails=$((fails + 1)); return
    fi
    if grep -q 'id="glyph' "$tmp/$name.svg"; then
        echo "FAIL: $name.svg stores glyphs as outlines"; fails=$((fails + 1)); return
    fi
    for label in "$@"; do
        # the label inside a text element (tspan content), not in a comment or attribute
        if ! grep -qF -- ">$label" "$tmp/$name.svg" && ! grep -qF -- "$label<" "$tmp/$name.svg"; then
            echo "FAIL: $name.svg lacks the text '$label'"; fails=$((fails + 1)); return
        fi
    done
    echo "ok: $name.png and $name.svg ($ntext text elements)"
}

# draw NAME ARGS... : the chart to $tmp/NAME.png and $tmp/NAME.svg (exit 0 each)
draw() {
    name=$1
    shift
    for ext in png svg; do
        expect_exit 0 "" -- "$@" --output "$tmp/$name.$ext"
    done
}

# run chart: the January logs, every run, and one run
draw run $BIN plot run --column "$COL" "$L/2025-01.csv"
check_chart run "xD [mol/mol]" "window with a stage count" "window's stages" "K7-001" \
    "censored: at or above" "sample's stages"
draw run1 $BIN plot run --column "$COL" "$L/2025-03.csv" --run K7-018
check_chart run1 "Run K7-018" "(left out of the fit)" "window of a left-out run"

# McCabe-Thiele at 30 stages: the zoomed inset of the top section, the pinch
draw mccabe $BIN plot mccabe --alpha 2.0 --xd 0.995 --reflux 6 --stages 30
check_chart mccabe "McCabe" "zoomed in the inset" "top 6 stages" "pinch (x = 0.1655)"

# fits of several months for the model, trend and trajectory charts
mkdir -p "$tmp/fits"
# (every month, as the README's demo does: the months whose windows cannot determine the
# form are refused, and the trend needs the fits after the repack too)
for f in "$L"/*.csv; do
    $BIN calibrate --quiet --form saturating --column "$COL" --fits "$tmp/fits" "$f" >/dev/null 2>&1
done
model=$($BIN fits find demo-bt-K-7 2025-11 --fits "$tmp/fits")
draw model $BIN plot model "$model"
check_chart model "fitted correlation" "fitted envelope"
# the fit's chart feeds a decision: its text output ends with the caution, as plot run's
if [ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ]; then
    echo "ok: plot model prints the caution"
else
    echo "FAIL: plot model lacks one caution"; cat "$tmp/out"; fails=$((fails + 1))
fi
draw trend $BIN plot trend demo-bt-K-7 --fits "$tmp/fits" --events "$EV" --reflux 3 --f-factor 1.3 --require 7.5
check_chart trend "forecast (extrapolated): dashed, light band" "repack" "required: 7.5" "stages incl. pot at R = 3"
draw hist $BIN plot history --column "$COL" "$L/2025-08.csv" "$L/2025-09.csv" "$L/2025-11.csv" "$L/2025-12.csv" \
    --events "$EV" --reflux 3 --f-factor 1.3
check_chart hist "EWMA of Q [-]" "CUSUM of Q [-]" "run at the condition" "EWMA"
draw traj $BIN plot trajectory --model "$model" --charge 25 --xb0 0.5 --boilup 3.6 --xd-setpoint 0.95 --reflux-max 12 --cut pot-x=0.15 --samples 0
check_chart traj "distillate xD" "pot xB" "outside the fitted envelope: dashed" "cut1"

# the text output goes on as the commands' own, with the chart named and the caution
$BIN plot trend demo-bt-K-7 --fits "$tmp/fits" --reflux 3 --f-factor 1.3 --output "$tmp/t.svg" >"$tmp/out" 2>&1
if grep -q "chart written to $tmp/t.svg" "$tmp/out" && grep -q "^Caution:" "$tmp/out"; then
    echo "ok: plot trend prints the chart's name and the caution"
else
    echo "FAIL: plot trend output"; cat "$tmp/out"; fails=$((fails + 1))
fi

# --json: the result object carries the caution as every JSON result does
$BIN plot mccabe --alpha 2.0 --xd 0.995 --reflux 6 --stages 30 --json --output "$tmp/j.svg" >"$tmp/out" 2>&1
if python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); sys.exit(0 if d["format"] == "stagecal-plot-result" and d["caution"].startswith("Caution: ") else 1)' "$tmp/out"; then
    echo "ok: plot --json carries the caution"
else
    echo "FAIL: plot --json output"; cat "$tmp/out"; fails=$((fails + 1))
fi

# usage errors
expect_exit 2 "option '--column' is required for 'plot run'" -- $BIN plot run "$L/2025-01.csv" --output "$tmp/x.png"
expect_exit 2 "at least one run log is required" -- $BIN plot run --column "$COL" --output "$tmp/x.png"
expect_exit 2 "option '--run' belongs to 'plot run'" -- $BIN plot mccabe --alpha 2 --xd 0.9 --reflux 3 --stages 5 --run A --output "$tmp/x.png"
expect_exit 2 "option '--points' belongs to 'plot model'" -- $BIN plot run --column "$COL" --points p.csv "$L/2025-01.csv" --output "$tmp/x.png"
expect_exit 65 "the logs have no run 'K9-999'" -- $BIN plot run --column "$COL" "$L/2025-01.csv" --run K9-999 --output "$tmp/x.png"
expect_exit 2 "option '--output' is required" -- $BIN plot trend demo-bt-K-7 --reflux 3
expect_exit 2 "unknown extension" -- $BIN plot trajectory --model m.json --output "$tmp/x.gif"
expect_exit 2 "'plot trend' draws one column" -- $BIN plot trend A-1 B-2 --reflux 3 --output "$tmp/x.png"
expect_exit 2 "unknown chart kind 'bars'" -- $BIN plot bars --output "$tmp/x.png"
expect_exit 0 "" -- $BIN plot --help
expect_exit 0 "" -- $BIN plot trend --help
finish
