#!/bin/sh
# valgrind-demo.sh — the README's demo commands under valgrind's memcheck (issue 8:
# "valgrind clean on the demo"). Each command runs with --error-exitcode so that an invalid
# read or write, a use of uninitialised memory or a definite/indirect leak in stagecal fails
# the script; "possibly lost" and "still reachable" blocks are ignored (fontconfig, cairo
# and PLplot keep caches for the life of the process). The fits go to a temporary directory.
#
#   sh tests/valgrind-demo.sh [BUILD_DIR]      (default: build; a build without sanitizers)
#
# Takes 2-4 minutes on one core. Not part of ctest (too slow for the unit suite); run it
# before a release and after changes to memory handling; DEVELOPERS.md says when.
set -u
root=$(cd "$(dirname "$0")/.." && pwd)
build=${1:-$root/build}
case $build in /*) ;; *) build=$root/$build ;; esac
S=$build/stagecal
[ -x "$S" ] || { echo "valgrind-demo: no program at $S (build first)" >&2; exit 2; }
command -v valgrind >/dev/null || { echo "valgrind-demo: valgrind is not installed" >&2; exit 77; }
cd "$root" || exit 2
work=$(mktemp -d)
[ -n "${KEEP:-}" ] || trap 'rm -rf "$work"' EXIT; echo "work: $work"
COL=datasets/columns/demo_benzene_toluene.json
L=datasets/demo/logs
VG="valgrind --quiet --num-callers=40 --suppressions=$root/tests/valgrind.supp --error-exitcode=99 --leak-check=full --errors-for-leak-kinds=definite,indirect --show-leak-kinds=definite,indirect --track-origins=yes"
failed=0
n=0
run() { # run NAME CMD...: the command under memcheck; its own exit status must be 0
    name=$1
    shift
    n=$((n + 1))
    # shellcheck disable=SC2086
    $VG "$@" >"$work/$name.out" 2>"$work/$name.err"
    rc=$?
    if [ $rc -eq 0 ]; then
        echo "ok   $name"
    else
        failed=$((failed + 1))
        echo "FAIL $name (exit $rc$([ $rc -eq 99 ] && echo ': memcheck errors'))"
        sed -n '1,40p' "$work/$name.err"
    fi
}
run invert "$S" invert --column $COL --xd 0.97 --xb 0.30 --reflux 3
run steps "$S" steps --alpha 2.5 --xd 0.95 --reflux 4 --stages 7
run steps-nrtl "$S" steps --column datasets/columns/kestrel_c3_ethanol_water.json --xd 0.8 --reflux 4 --stages 7
run check "$S" check --column $COL $L/2025-01.csv $L/2025-02.csv $L/2025-03.csv
run invert-log "$S" invert --column $COL --output "$work/inv.csv" $L/2025-01.csv
run calibrate "$S" calibrate --quiet --column $COL --fits "$work/fits" --report-out "$work/r.html" \
    --points-out "$work/points.csv" $L/2025-01.csv $L/2025-02.csv $L/2025-03.csv
for m in 2025-04 2025-08 2025-11; do
    run "calibrate-$m" "$S" calibrate --quiet --form saturating --column $COL --fits "$work/fits" $L/$m.csv
done
model=$("$S" fits find demo-bt-K-7 2025-01-06..2025-03-31 --fits "$work/fits")
m08=$("$S" fits find demo-bt-K-7 2025-08 --fits "$work/fits")
m11=$("$S" fits find demo-bt-K-7 2025-11 --fits "$work/fits")
run fits-list "$S" fits list demo-bt-K-7 --fits "$work/fits" --events datasets/demo/events.csv
run fits-label "$S" fits label demo-bt-K-7 2025-08 august --fits "$work/fits"
run history "$S" history --column $COL $L/2025-08.csv $L/2025-09.csv $L/2025-11.csv $L/2025-12.csv \
    --events datasets/demo/events.csv --reflux 3 --f-factor 1.3 --require 7.5 --design-hetp 0.6 --json
run trend "$S" trend demo-bt-K-7 --fits "$work/fits" --events datasets/demo/events.csv --reflux 3 --f-factor 1.3 --require 7.5
run hetp "$S" hetp "$m08" "$m11" --reflux 3 --f-factor 1.3
run predict "$S" predict --model "$m11" --charge 25 --xb0 0.5 --boilup 3.6 --reflux 3 --cut pot-x=0.15 --samples 20
run predict-load "$S" predict --model "$model" --f-factor 1.3 --charge 25 --xb0 0.5 --boilup 3.6 --reflux 3 --cut pot-x=0.15 --samples 20
run predict-dynamic "$S" predict --model "$m11" --column datasets/columns/demo_benzene_toluene_holdup.json --charge 25 --xb0 0.5 --boilup 3.6 --reflux 3 --cut product:mean-x=0.98 --cut slop:pot-x=0.15 --samples 4
run plot-mccabe "$S" plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 --murphree 0.8 -o "$work/d.svg"
run plot-model "$S" plot model "$model" --points "$work/points.csv" --residuals -o "$work/m.png"
run plot-run "$S" plot run --column $COL $L/2025-03.csv --output "$work/runs.svg"
run plot-run-one "$S" plot run --column $COL $L/2025-03.csv --run K7-018 --output "$work/run.png"
run plot-mccabe-30 "$S" plot mccabe --alpha 2.0 --xd 0.995 --reflux 6 --stages 30 -o "$work/d30.png"
run plot-trend "$S" plot trend demo-bt-K-7 --fits "$work/fits" --events datasets/demo/events.csv --reflux 3 --f-factor 1.3 --require 7.5 --output "$work/trend.svg"
run plot-history "$S" plot history --column $COL $L/2025-08.csv $L/2025-09.csv $L/2025-11.csv $L/2025-12.csv \
    --events datasets/demo/events.csv --reflux 3 --f-factor 1.3 --output "$work/history.svg"
run plot-trajectory "$S" plot trajectory --model "$m11" --charge 25 --xb0 0.5 --boilup 3.6 --xd-setpoint 0.95 --reflux-max 12 --cut pot-x=0.3 --cut pot-x=0.15 --samples 20 --output "$work/batch.png"
run report "$S" report "$model" --points "$work/points.csv" --output "$work/r2.html"
run report-condition "$S" report "$m11" --xd 0.95 --reflux 3 --output "$work/r3.html"
echo "valgrind-demo: $n commands, $failed failed"
[ $failed -eq 0 ]
