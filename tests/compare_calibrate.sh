# compare_calibrate.sh OLD_BIN NEW_BIN ROOT [BIG_COLUMN BIG_LOG]
# Every calibrate output (tests/cli/calibrate_outputs.sh: summary, model file, --json,
# --samples-out, --points-out, warnings) of OLD_BIN against NEW_BIN with --threads 0, 1 and 2,
# on the demo logs under ROOT/datasets: the README's quarter with a 200-resample bootstrap, all
# fourteen months for each of the three demo columns, and each month alone (the README's loop).
# With BIG_COLUMN and BIG_LOG also that log with --form saturating --bootstrap 1000 (the
# bench's year: tests/bench_calibrate.c writes it, docs/performance.md has its column file).
# Prints one line per case and "N case(s) differ" at the end; exit 1 when any differs.
OLD=$1
NEW=$2
ROOT=$3
OUTS="$(dirname "$0")/cli/calibrate_outputs.sh"
W=$(mktemp -d)
trap 'rm -rf "$W"' EXIT
ncase=0
ndiff=0
one() { # one NAME ARGS... (the calibrate arguments, without --threads)
    name=$1
    shift
    ncase=$((ncase + 1))
    sh "$OUTS" "$W/old" "$OLD" "$@"
    for t in 0 1 2; do
        sh "$OUTS" "$W/new$t" "$NEW" --threads "$t" "$@"
        if [ -s "$W/old/summary.txt" ] && diff -r "$W/old" "$W/new$t" >/dev/null; then
            echo "same: $name, --threads $t"
        else
            echo "DIFFERS: $name, --threads $t"
            ndiff=$((ndiff + 1))
        fi
        rm -rf "$W/new$t"
    done
    rm -rf "$W/old"
}
D=$ROOT/datasets
BT=$D/columns/demo_benzene_toluene.json
one "quick start quarter, bootstrap 200" --column "$BT" --bootstrap 200 \
    "$D/demo/logs/2025-01.csv" "$D/demo/logs/2025-02.csv" "$D/demo/logs/2025-03.csv"
for c in demo_benzene_toluene demo_benzene_toluene_holdup demo_alpha; do
    one "$c, fourteen months, bootstrap 200" --column "$D/columns/$c.json" --bootstrap 200 \
        "$D"/demo/logs/*.csv
done
for f in "$D"/demo/logs/*.csv; do
    one "$(basename "$f"), saturating" --column "$BT" --form saturating "$f"
done
if [ $# -ge 5 ]; then
    one "$(basename "$5"), saturating, bootstrap 1000" --column "$4" --form saturating \
        --bootstrap 1000 "$5"
fi
echo "$ncase case(s), $ndiff of $((3 * ncase)) comparisons differ"
[ "$ndiff" -eq 0 ]
