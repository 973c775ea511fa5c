# The invented 10-minute historian scenario (issue 16): INVENTED DEMO DATA, not plant data.
# tests/cli/historian_scenario.py rewrites the invented demo logs as a historian exports
# them: four batches a month in one file, no run column, W in kg with load-cell noise
# (sd 10 kg), wt%, kW, mbar, degC, and ';' with decimal commas. Checked here:
#  - the runs are found by themselves (time gaps), each cut named by its line;
#  - the semicolon/decimal-comma file reads exactly like its comma/decimal-point twin;
#  - the load-cell noise is estimated, so no run is a gross error and noise rises of W are
#    no warnings (before: one run, closure -31 %, GROSS ERROR, ANALYSER DRIFT, 121 outliers);
#  - months calibrate with the defaults (January and March; February's four batches give
#    one quasi-steady window, and the message says so and what would help).
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
python3 "$(dirname "$0")/historian_scenario.py" "$COL" "$ROOT/datasets/demo/logs" "$tmp" \
    semicolon 2025-01 2025-02 2025-03 || { echo "FAIL: generator"; exit 1; }
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

# month by month with the defaults
for m in 2025-01 2025-03; do
    expect_exit 0 "" -- "$BIN" calibrate --column "$COL" --dry-run --fits "$tmp/fits" "$tmp/$m.csv"
    grep -q "in 4 runs from 1 log" "$tmp/out" && echo "ok: $m: 4 runs" ||
        { echo "FAIL: $m: not 4 runs"; fails=$((fails + 1)); }
done
expect_exit 65 "1 windows with a stage count in 4 runs" -- \
    "$BIN" calibrate --column "$COL" --dry-run --quiet --fits "$tmp/fits" "$tmp/2025-02.csv"
finish
