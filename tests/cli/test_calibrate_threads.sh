# calibrate --threads 0, 1 and 2 on the demo column's quarter (README quick start) with a
# bootstrap: the summary, the model file, --json, --samples-out and --points-out the same
# byte for byte (tests/cli/calibrate_outputs.sh takes out only the fitting time, checksum,
# command line and time-stamped name), and a control that the comparison sees a change (another
# --warm-up). No calibrate output shows the bootstrap's intervals, so regress --threads 0, 1, 2
# on the windows' points (regress prints them), and invert --threads 0, 2 on the same logs.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
LOGS="$ROOT/datasets/demo/logs/2025-01.csv $ROOT/datasets/demo/logs/2025-02.csv $ROOT/datasets/demo/logs/2025-03.csv"
OUTS="$(dirname "$0")/calibrate_outputs.sh"

for t in 0 1 2; do
    # shellcheck disable=SC2086
    if ! sh "$OUTS" "$tmp/t$t" "$BIN" --column "$COL" --bootstrap 200 --threads "$t" $LOGS; then
        echo "FAIL: calibrate --threads $t exited non-zero"; fails=$((fails + 1))
    fi
done
for f in summary.txt model.json calibration.json samples.csv points.csv stderr.txt; do
    if [ ! -s "$tmp/t0/$f" ]; then
        echo "FAIL: calibrate --threads 0 wrote no $f"; fails=$((fails + 1))
    fi
done
for t in 1 2; do
    if diff -r "$tmp/t0" "$tmp/t$t" >"$tmp/d"; then
        echo "ok: calibrate --threads $t: every output as with --threads 0"
    else
        echo "FAIL: calibrate --threads $t differs from --threads 0"; head -20 "$tmp/d"
        fails=$((fails + 1))
    fi
done
# all fourteen months with the holdup column: more runs and rows (many row blocks, the
# holdup-compensated drift checks)
HCOL="$ROOT/datasets/columns/demo_benzene_toluene_holdup.json"
for t in 0 2; do
    sh "$OUTS" "$tmp/h$t" "$BIN" --column "$HCOL" --threads "$t" "$ROOT"/datasets/demo/logs/*.csv
done
if [ -s "$tmp/h0/model.json" ] && diff -r "$tmp/h0" "$tmp/h2" >"$tmp/d"; then
    echo "ok: calibrate --threads 2 on fourteen months (holdup column): every output as with 0"
else
    echo "FAIL: calibrate --threads 2 on fourteen months differs from 0"; head -20 "$tmp/d"
    fails=$((fails + 1))
fi
# shellcheck disable=SC2086
sh "$OUTS" "$tmp/warm" "$BIN" --column "$COL" --bootstrap 200 --threads 2 --warm-up 50 $LOGS
if diff -r "$tmp/t0" "$tmp/warm" >/dev/null; then
    echo "FAIL: control: --warm-up 50 changed no output (the comparison cannot see a change)"
    fails=$((fails + 1))
else
    echo "ok: control: --warm-up 50 changes the outputs"
fi

# invert: the per-row CSV of the same logs
for t in 0 2; do
    # shellcheck disable=SC2086
    "$BIN" invert --column "$COL" --threads "$t" --quiet --output "$tmp/inv$t.csv" $LOGS >/dev/null
done
if cmp -s "$tmp/inv0.csv" "$tmp/inv2.csv" && [ -s "$tmp/inv0.csv" ]; then
    echo "ok: invert --threads 2 writes the bytes of --threads 0"
else
    echo "FAIL: invert --threads 2 differs from --threads 0"; fails=$((fails + 1))
fi

# regress: the bootstrap's intervals and standard errors, case and residual resampling
for kind in case residual; do
    for t in 0 1 2; do
        "$BIN" regress "$tmp/t0/points.csv" --form saturating --bootstrap 300 --resample "$kind" \
            --threads "$t" --json --quiet >"$tmp/reg$t.json"
    done
    if grep -q '"boot_low"' "$tmp/reg0.json" && cmp -s "$tmp/reg0.json" "$tmp/reg1.json" &&
        cmp -s "$tmp/reg0.json" "$tmp/reg2.json"; then
        echo "ok: regress --bootstrap 300 --resample $kind: --threads 1, 2 as 0"
    else
        echo "FAIL: regress --resample $kind: threads change the output"; fails=$((fails + 1))
    fi
done
finish
