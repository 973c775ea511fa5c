# calibrate_outputs.sh OUT BIN ARGS... — runs `BIN calibrate ARGS...` twice (the summary text
# with the model file, --samples-out and --points-out; then --json --dry-run) and leaves in the
# directory OUT what they wrote, with only what must differ between two runs taken out: the
# model file's fitting time, its checksum and its recorded command line, and the model file's
# time-stamped name. Two builds, or two --threads, give the same OUT byte for byte when their
# calibrations are the same (tests/cli/test_calibrate_threads.sh; docs/performance.md, ninth
# pass, compares main's program with the threaded one this way). Exit status: calibrate's.
OUT=$1
BIN=$2
shift 2
mkdir -p "$OUT"
W=$(mktemp -d)
"$BIN" calibrate --fits "$W/fits" --samples-out "$W/samples.csv" --points-out "$W/points.csv" \
    "$@" >"$W/summary.txt" 2>"$W/stderr.txt"
rc=$?
"$BIN" calibrate --fits "$W/fits" --json --dry-run "$@" >"$W/calibration.json" 2>>"$W/stderr.txt"
rc2=$?
# the model file: one per fits directory; the fields that record when and how it was made
for f in "$W"/fits/*/*.json; do
    [ -f "$f" ] || continue
    sed -e '/^    "fitted_utc": /d' -e '/^    "command_line": /d' \
        -e '/^  "checksum": {/,/^  }/{/"value": /d}' "$f" >"$OUT/model.json"
done
for k in summary.txt calibration.json samples.csv points.csv stderr.txt; do
    [ -f "$W/$k" ] && sed -e "s|$W|W|g" -e 's/-[0-9]\{8\}T[0-9]\{6\}Z\.json/-TIME.json/g' \
        "$W/$k" >"$OUT/$k"
done
rm -rf "$W"
[ "$rc" -ne 0 ] && exit "$rc"
exit "$rc2"
