# compare_calibrate.sh OLD_BIN NEW_BIN ROOT [BIG_COLUMN BIG_LOG]
# Every calibrate output (tests/cli/calibrate_outputs.sh: summary, model file, --json,
# --samples-out, --points-out, warnings) of OLD_BIN against NEW_BIN with --threads 0, 1 and 2,
# on the demo logs under ROOT/datasets: the README's quarter with a 200-resample bootstrap, all
# fourteen months for each of the three demo columns, and each month alone (the README's loop);
# then the settings that take other paths through the streamed calibration (docs/performance.md,
# eleventh pass): flagged runs kept, each holdup compensation (--holdup stages without a stated
# holdup holds the log), the stage-space and censored methods, the censored xD readings of a
# month read against a tighter limit, no window at all (the failure's evidence hint) and a log
# with validation errors (the findings), where stderr is what is compared.
# With BIG_COLUMN and BIG_LOG also that log with --form saturating --bootstrap 1000 (the
# bench's year: tests/bench_calibrate.c writes it, docs/performance.md has its column file).
# Prints one line per case and "N case(s) differ" at the end; exit 1 when any differs.
# NOTE_ONCE=1: as in compare_invert.sh, a case that differs only by the F-factor note said once
# (docs/runlog.md) is listed as "same with the note said once" and does not count.
OLD=$1
NEW=$2
ROOT=$3
OUTS="$(dirname "$0")/cli/calibrate_outputs.sh"
W=$(mktemp -d)
trap 'rm -rf "$W"' EXIT
ncase=0
ndiff=0
# once OLD NEW: the two directories equal but for the F-factor note said once (NOTE_ONCE=1,
# OLD_BIN from before that change, docs/runlog.md): the old samples.csv without the rows' note
# "no F-factor (needs V, …)", the new stderr.txt without its one line saying it
once() {
    rm -rf "$W/once" && mkdir -p "$W/once/o" "$W/once/n" && cp "$1"/* "$W/once/o/" &&
        cp "$2"/* "$W/once/n/" || return 1
    [ -f "$W/once/o/samples.csv" ] &&
        sed 's/,"no F-factor (needs V, diameter, molar masses and a temperature)",/,,/' \
            "$1/samples.csv" >"$W/once/o/samples.csv"
    grep -v '^stagecal calibrate: no F-factor on any row: ' "$2/stderr.txt" >"$W/once/n/stderr.txt"
    diff -r "$W/once/o" "$W/once/n" >/dev/null
}
one() { # one NAME ARGS... (the calibrate arguments, without --threads)
    name=$1
    shift
    ncase=$((ncase + 1))
    sh "$OUTS" "$W/old" "$OLD" "$@"
    for t in 0 1 2; do
        sh "$OUTS" "$W/new$t" "$NEW" --threads "$t" "$@"
        if { [ -s "$W/old/summary.txt" ] || [ -s "$W/old/stderr.txt" ]; } &&
            diff -r "$W/old" "$W/new$t" >/dev/null; then
            echo "same: $name, --threads $t"
        elif [ "${NOTE_ONCE:-0}" = 1 ] && [ -s "$W/old/summary.txt" ] && once "$W/old" "$W/new$t"; then
            echo "same with the note said once: $name, --threads $t"
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
BTH=$D/columns/demo_benzene_toluene_holdup.json
ALL=$(ls "$D"/demo/logs/*.csv)
# shellcheck disable=SC2086
{
    one "fourteen months, --keep-flagged" --column "$BT" --keep-flagged $ALL
    for h in none lag stages; do
        one "fourteen months, --holdup $h" --column "$BT" --holdup "$h" $ALL
        one "holdup column, fourteen months, --holdup $h" --column "$BTH" --holdup "$h" $ALL
    done
    one "fourteen months, --method stage, --covariance hc3" --column "$BT" --method stage \
        --covariance hc3 $ALL
    one "fourteen months, --method censored" --column "$BT" --method censored $ALL
    one "a month, --min-window 2000min (no window)" --column "$BT" --min-window 2000min \
        "$D/demo/logs/2025-01.csv"
    one "a month, --warm-up 30min --min-window 40min" --column "$BT" --warm-up 30min \
        --min-window 40min "$D/demo/logs/2025-01.csv"
}
# a log with a validation error in its third row
BAD=$W/bad.csv
awk -F, 'NR == 4 { $5 = "1.3" } 1' OFS=, "$D/demo/logs/2025-01.csv" >"$BAD"
one "a month with xB 1.3 in a row (validation error)" --column "$BT" "$BAD"
# the distillate analyser of three months clipped at 0.95: censored readings ('>0.95')
for m in 02 05 09; do
    awk -F, 'NR > 1 && $4 + 0 > 0.95 { $4 = ">0.95" } 1' OFS=, "$D/demo/logs/2025-$m.csv" \
        >"$W/clip-$m.csv"
done
one "three months, xD clipped at 0.95" --column "$BT" "$W"/clip-*.csv
one "three months, xD clipped at 0.95, --method censored" --column "$BT" --method censored \
    "$W"/clip-*.csv
if [ $# -ge 5 ]; then
    one "$(basename "$5"), saturating, bootstrap 1000" --column "$4" --form saturating \
        --bootstrap 1000 "$5"
fi
echo "$ncase case(s), $ndiff of $((3 * ncase)) comparisons differ"
[ "$ndiff" -eq 0 ]
