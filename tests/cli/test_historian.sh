# The invented 10-minute historian scenario (issue 16): INVENTED DEMO DATA, not plant data.
# tests/cli/historian_scenario.py rewrites the invented demo logs as a historian exports
# them: four batches a month in one file, no run column, W in kg with load-cell noise
# (sd 10 kg), wt%, kW, mbar, degC, and ';' with decimal commas. Checked here:
#  - the runs are found by themselves (time gaps), each cut named by its line;
#  - the semicolon/decimal-comma file reads exactly like its comma/decimal-point twin;
#  - the load-cell noise is estimated, so no run is a gross error and noise rises of W are
#    no warnings (before: one run, closure -31 %, GROSS ERROR, ANALYSER DRIFT, 121 outliers);
#  - every month calibrates with the defaults, all 14 of the invented logs (before the
#    R-statistic was restarted at the end of the warm-up, 2025-02, 2025-06 and 2026-01 had
#    one quasi-steady window each: the filters still remembered the start-up ramp for
#    about 35 samples, six hours of a ten-hour batch logged every 10 minutes).
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
python3 "$(dirname "$0")/historian_scenario.py" "$COL" "$ROOT/datasets/demo/logs" "$tmp" \
    semicolon 2025-01 2025-02 2025-03 2025-04 2025-05 2025-06 2025-07 2025-08 2025-09 2025-10 \
    2025-11 2025-12 2026-01 2026-02 || { echo "FAIL: generator"; exit 1; }
mkdir "$tmp/comma"
python3 "$(dirname "$0")/historian_scenario.py" "$COL" "$ROOT/datasets/demo/logs" "$tmp/comma" \
    comma 2025-01 || { echo "FAIL: generator"; exit 1; }

# runs found by themselves: 4 per month, the cuts named by line
"$BIN" check --column "$COL" "$tmp/2025-01.csv" >"$tmp/check.txt" 2>"$tmp/check.err"
if [ "$(grep -c "no 'run' column: run '2025-01.csv#[234]' starts here, after a time gap of" \
    "$tmp/check.txt")" -eq 3 ] && grep -q "244 rows, 4 runs: 0 errors" "$tmp/check.err"; then
    echo "ok: four runs found, three cuts named by line"
else
    echo "FAIL: runs not found"; cat "$tmp/check.txt" "$tmp/check.err"; fails=$((fails + 1))
fi
if grep -q "GROSS ERROR\|ANALYSER DRIFT\|holdup rose" "$tmp/check.txt"; then
    echo "FAIL: load-cell noise read as errors"; cat "$tmp/check.txt"; fails=$((fails + 1))
else
    echo "ok: no gross error, drift or W-rise warning from load-cell noise"
fi
# at most one outlier sample per run (the invented logs hold one planted xB error, line 205)
if awk '/outlier samples/ { n = $0; sub(/.*, /, "", n); if (n + 0 > 1) bad = 1 } END { exit bad }' \
    "$tmp/check.txt"; then
    echo "ok: at most one outlier sample per run"
else
    echo "FAIL: too many outliers"; cat "$tmp/check.txt"; fails=$((fails + 1))
fi

# the load-cell noise estimated per run (--json): sd 10 kg is about 0.12 kmol at M ≈ 85 g/mol;
# the band 0.06-0.25 kmol allows for the 1-kg rounding and one series' spread (8.5 %)
"$BIN" check --json --quiet --column "$COL" "$tmp/2025-01.csv" >"$tmp/check.json"
if /usr/bin/python3 -c 'import json,sys
d = json.load(open(sys.argv[1]))
ok = len(d["runs"]) == 4 and all(r["u_w_source"] == "estimated from W" and
                                 60 < r["u_w_mol"] < 250 for r in d["runs"])
print(" ".join("%.0f" % r["u_w_mol"] for r in d["runs"]), "mol")
sys.exit(0 if ok else 1)' "$tmp/check.json"; then
    echo "ok: u(W) estimated per run near the 10 kg of the scenario"
else
    echo "FAIL: u(W) estimate"; fails=$((fails + 1))
fi

# the dialects read alike: per-row inversion byte-identical
"$BIN" invert --column "$COL" -o "$tmp/semi.csv" --quiet "$tmp/2025-01.csv" >/dev/null
"$BIN" invert --column "$COL" -o "$tmp/comma.csv" --quiet "$tmp/comma/2025-01.csv" >/dev/null
sed 's|^[^,]*comma/|X/|; s|^[^,]*/|X/|' "$tmp/comma.csv" >"$tmp/a"
sed 's|^[^,]*/|X/|' "$tmp/semi.csv" >"$tmp/b"
if [ -s "$tmp/a" ] && cmp -s "$tmp/a" "$tmp/b"; then
    echo "ok: ';' with decimal commas reads like ',' with decimal points"
else
    echo "FAIL: the dialects differ"; diff "$tmp/a" "$tmp/b" | head; fails=$((fails + 1))
fi
# forced dialect
expect_exit 0 "" -- "$BIN" check --csv-dialect semicolon --column "$COL" "$tmp/2025-01.csv"

# month by month with the defaults: every one of the 14 months, 4 runs each, at least 2
# windows with stage counts (the composition fit of the 1-parameter default needs 2)
for m in 2025-01 2025-02 2025-03 2025-04 2025-05 2025-06 2025-07 2025-08 2025-09 2025-10 \
    2025-11 2025-12 2026-01 2026-02; do
    expect_exit 0 "" -- "$BIN" calibrate --column "$COL" --dry-run --fits "$tmp/fits" "$tmp/$m.csv"
    if grep -q "in 4 runs from 1 log" "$tmp/out" &&
        awk '/quasi-steady windows/ { sub(/.*\(/, ""); n = $1 } END { exit !(n + 0 >= 2) }' \
            "$tmp/out"; then
        echo "ok: $m: 4 runs, $(grep -o '[0-9]* quasi-steady windows ([0-9]* with stage counts)' \
            "$tmp/out")"
    else
        echo "FAIL: $m: not 4 runs with 2 windows"; grep "evidence:" "$tmp/out"; fails=$((fails + 1))
    fi
done
finish
