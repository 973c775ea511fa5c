#!/bin/sh
# test_kill_calibrate.sh — no data lost (issue 8): runs `stagecal calibrate` again and
# again into one fits directory and kills it with SIGKILL at many points of its run,
# densest around the end where the model file is written. After every kill: the model
# files written before are byte-for-byte intact (SHA-256), and every other file in the
# column's folder is a complete model (tool_modelcheck: stagecal_model_load, which checks
# the format, version and checksum). Leftover temporary files (.<id>.tmp-*) are counted
# and reported; they are litter, not data loss.
#   sh test_kill_calibrate.sh <stagecal-binary> <repo-root>
set -u
S=$1
root=$2
check=$(dirname "$S")/tests/tool_modelcheck
col=$root/datasets/columns/demo_benzene_toluene.json
logs="$root/datasets/demo/logs/2025-01.csv $root/datasets/demo/logs/2025-02.csv"
[ -x "$check" ] || { echo "missing $check (build the tests)"; exit 1; }
for f in $col $logs; do
    [ -r "$f" ] || { echo "missing demo input $f"; exit 1; }
done
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fits=$work/fits
kills=${STAGECAL_KILLS:-60}

# The "old" fits: two complete runs, timed to place the kills (a second fit in the same
# second gets a "-2" name; nothing is ever replaced).
"$S" calibrate --quiet --column "$col" --fits "$fits" $logs >/dev/null 2>&1 || { echo "calibrate failed"; exit 1; }
t0=$(date +%s%N)
"$S" calibrate --quiet --column "$col" --fits "$fits" $logs >/dev/null 2>&1 || { echo "calibrate failed"; exit 1; }
t1=$(date +%s%N)
dir=$(ls -d "$fits"/*/)
ls "$dir" | grep -v '^\.' >"$work/old.list"
[ "$(wc -l <"$work/old.list")" -eq 2 ] || { echo "expected 2 model files after two runs"; exit 1; }
(cd "$dir" && sha256sum $(cat "$work/old.list")) >"$work/old.sha"
run_ns=$((t1 - t0))
echo "one calibrate run: $((run_ns / 1000000)) ms; $kills kills"

fail=0
landed_before=0
landed_after=0
litter=0
i=0
while [ "$i" -lt "$kills" ]; do
    # Delays spread evenly from 10 % to 110 % of a timed run (the write comes last;
    # the spread of run times under load scatters the kills around it).
    pct=$((10 + i * 100 / kills))
    delay_us=$((run_ns / 1000 * pct / 100))
    before=$(ls "$dir" | grep -cv '^\.')
    "$S" calibrate --quiet --column "$col" --fits "$fits" $logs >/dev/null 2>&1 &
    pid=$!
    sleep "$(printf '%d.%06d' $((delay_us / 1000000)) $((delay_us % 1000000)))"
    kill -KILL "$pid" 2>/dev/null
    wait "$pid" 2>/dev/null
    # Old files intact.
    if ! (cd "$dir" && sha256sum -c --quiet "$work/old.sha"); then
        echo "FAIL kill $i at $pct %: an earlier model file changed"
        fail=1
    fi
    # Every visible file that is not an earlier one loads.
    for f in $(ls "$dir" | grep -v '^\.'); do
        grep -q " $f\$" "$work/old.sha" && continue
        "$check" "$dir$f" || { echo "FAIL kill $i at $pct %: '$f' is not a complete model"; fail=1; }
    done
    after=$(ls "$dir" | grep -cv '^\.')
    if [ "$after" -gt "$before" ]; then
        landed_after=$((landed_after + 1))
        # Keep the comparison set current: new complete files become "old" too.
        (cd "$dir" && sha256sum $(ls | grep -v '^\.')) >"$work/old.sha"
    else
        landed_before=$((landed_before + 1))
    fi
    n=$(ls -A "$dir" | grep -c '^\.' || true)
    if [ "$n" -gt 0 ]; then
        litter=$((litter + n))
        rm -f "$dir".*.tmp-*
    fi
    i=$((i + 1))
done
echo "kills: $kills; no new file: $landed_before; complete new file: $landed_after; temporary files left: $litter"
[ "$fail" -eq 0 ] || exit 1
# The test means something only if some kills landed before the write finished.
[ "$landed_before" -gt 0 ] || { echo "no kill landed before the model was written"; exit 1; }
