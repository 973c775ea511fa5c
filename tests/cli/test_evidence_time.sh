# Evidence settings in time (issue 16 item 1): --warm-up and --min-window on invert, check,
# calibrate and history take a time with its unit and are turned into samples by each run's
# median sample spacing. The invented demo logs are sampled every 10 minutes, so 150min and
# 60min are the sample defaults (15 and 6 samples) and must give byte-identical output; short
# batches (5 h, 30 rows) cut from a demo log still give windows with the defaults.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
LOG="$ROOT/datasets/demo/logs/2025-01.csv"

windows() { # the number of quasi-steady windows invert reports
    "$BIN" invert --column "$COL" -o "$tmp/rows.csv" --quiet "$@" |
        sed -n 's/.*; \([0-9]*\) quasi-steady windows;.*/\1/p'
}

"$BIN" invert --column "$COL" -o "$tmp/def.csv" --quiet "$LOG" >/dev/null
"$BIN" invert --column "$COL" -o "$tmp/time.csv" --quiet --warm-up 150min --min-window 1h \
    "$LOG" >/dev/null
if cmp -s "$tmp/def.csv" "$tmp/time.csv"; then
    echo "ok: 150min/1h at 10-minute logging reproduce the sample defaults"
else
    echo "FAIL: --warm-up 150min --min-window 1h changed the per-row output"; fails=$((fails + 1))
fi

# short batches: rows 13..42 of every run (5 h each, without the total-reflux start)
awk -F, 'NR == 1 { print; next } { n[$1]++ } n[$1] > 12 && n[$1] <= 42' "$LOG" >"$tmp/short.csv"
wd=$(windows "$tmp/short.csv")
wold=$(windows --warm-up 150min --min-window 60min "$tmp/short.csv")
wtime=$(windows --warm-up 30min --min-window 40min "$tmp/short.csv")
echo "short batches: $wd windows (defaults), $wold (fixed 15/6 samples), $wtime (30min/40min)"
# 6 runs of 30 rows: the capped defaults must find more windows than the fixed sample rule
if [ -n "$wd" ] && [ -n "$wold" ] && [ "$wd" -gt "$wold" ] && [ "$wd" -ge 6 ] &&
    [ -n "$wtime" ] && [ "$wtime" -ge 6 ]; then
    echo "ok: short batches give windows with the defaults and with 30min/40min"
else
    echo "FAIL: short batches: $wd / $wold / $wtime windows"; fails=$((fails + 1))
fi

# one spelling on every run-log command; bad values are usage errors
for cmd in invert check calibrate history; do
    "$BIN" "$cmd" --help | grep -q -- "--warm-up TIME" &&
        "$BIN" "$cmd" --help | grep -q -- "--min-window TIME" &&
        echo "ok: $cmd has --warm-up and --min-window" ||
        { echo "FAIL: $cmd lacks --warm-up/--min-window"; fails=$((fails + 1)); }
done
expect_exit 2 "option '--warm-up': '3x' is not a time" -- "$BIN" check --warm-up 3x "$LOG"
expect_exit 2 "option '--min-window': '-5min' is not a time" -- \
    "$BIN" invert --column "$COL" --min-window -5min "$LOG"
expect_exit 0 "" -- "$BIN" check --warm-up 0.5h --min-window 2400s "$LOG"
# too little evidence: the message counts the windows, says per run why (rows in warm-up,
# steady rows, longest steady stretch) and which setting would help (one line, exit 65)
awk -F, 'NR == 1 { print; next } { n[$1]++ } n[$1] > 12 && n[$1] <= 30' "$LOG" >"$tmp/vshort.csv"
expect_exit 65 "evidence: 0 windows with a stage count in 6 runs; run 'K7-001' 18 rows: 15 warm-up" \
    -- "$BIN" calibrate --column "$COL" --dry-run --quiet --fits "$tmp/fits" --warm-up 150min \
    --min-window 60min "$tmp/vshort.csv"
grep -q "try a shorter --min-window" "$tmp/err" && grep -q "try a shorter --warm-up" "$tmp/err" &&
    echo "ok: the message names the settings that would help" ||
    { echo "FAIL: no setting named"; fails=$((fails + 1)); }
finish
