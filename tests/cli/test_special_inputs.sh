#!/bin/sh
# test_special_inputs.sh — issue 18, "Must show": /dev/zero, a FIFO with no writer, a
# directory and a 2 GiB sparse file given as each input kind (run log, column file, model
# file, points file, events file, plan file). Each must be refused with one message that
# names the file, exit 65 or 66 (docs/cli.md), without reading what it cannot bound: the
# command finishes (a hang guard of 20 s kills it otherwise: a FIFO with no writer used to
# block forever) and its peak resident memory stays under 100 MB (/dev/zero as a run log
# grew to 5.3 GB in 10 s before the readers were bounded). The time and memory of each case
# are printed (the must-show asks for a message within 2 s; the guard is wider so a loaded
# machine does not fail the test, and the printed figures are what the note quotes).
#   sh test_special_inputs.sh <stagecal-binary> <repo-root>
set -u
S=$1
root=$2
cd "$root" || exit 1
col=datasets/columns/demo_benzene_toluene.json
good=tests/badinput/good.csv
model=tests/badinput/model_good.json
work=$(mktemp -d)
fifo_pid=
trap 'rm -rf "$work"' EXIT
fails=0
TIME=/usr/bin/time
[ -x "$TIME" ] || TIME=

mkfifo "$work/fifo" || { echo "mkfifo failed"; exit 1; }
mkdir "$work/dir"
truncate -s 2G "$work/sparse" || { echo "truncate failed"; exit 1; }

# The command reading input kind $1 from path $2.
cmd_for() {
    case $1 in
    runlog) echo "$S calibrate --quiet --dry-run --column $col $2" ;;
    column) echo "$S check --quiet --column $2 $good" ;;
    model) echo "$S hetp $2 --reflux 3" ;;
    points) echo "$S regress $2 --form constant" ;;
    events) echo "$S trend demo-bt-K-7 --reflux 4 --fits datasets --events $2" ;;
    plan) echo "$S predict --model $model --column $col --plan $2" ;;
    esac
}

for kind in runlog column model points events plan; do
    for special in /dev/zero "$work/fifo" "$work/dir" "$work/sparse"; do
        c=$(cmd_for "$kind" "$special")
        start=$(date +%s%N)
        if [ -n "$TIME" ]; then
            # shellcheck disable=SC2086 # $c is a command line of plain words
            timeout -s KILL 20 "$TIME" -f "%M" -o "$work/rss" $c >"$work/out" 2>"$work/err" </dev/null
        else
            # shellcheck disable=SC2086
            timeout -s KILL 20 $c >"$work/out" 2>"$work/err" </dev/null
        fi
        rc=$?
        ms=$((($(date +%s%N) - start) / 1000000))
        rss=$([ -n "$TIME" ] && tail -n 1 "$work/rss" || echo "?")
        case $special in "$work"/*) shown="\$T/${special##*/}" ;; *) shown=$special ;; esac
        bad=""
        case $rc in
        65 | 66) ;;
        137) bad="killed by the 20 s guard (hung)" ;;
        *) bad="exit $rc (expected 65 or 66)" ;;
        esac
        grep -qF -- "$special" "$work/err" || bad="$bad${bad:+; }stderr does not name $shown"
        [ -s "$work/out" ] && bad="$bad${bad:+; }stdout not empty"
        case $rss in
        '' | *[!0-9]*) ;;
        *) [ "$rss" -lt 102400 ] || bad="$bad${bad:+; }peak RSS $rss kB >= 100 MB" ;;
        esac
        msg=$(sed -e "s|$work|\$T|g" "$work/err" | grep -v ": warning: " | head -n 1)
        if [ -n "$bad" ]; then
            echo "FAIL $kind $shown: $bad"
            sed -e "s|$work|\$T|g" "$work/err"
            fails=$((fails + 1))
        else
            echo "ok $kind $shown: exit $rc in $ms ms, peak RSS $rss kB: $msg"
        fi
    done
done
if [ "$fails" -ne 0 ]; then
    echo "$fails failure(s)"
    exit 1
fi
echo "all passed"
