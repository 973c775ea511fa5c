#!/bin/sh
# test_race.sh — racing writers (issue 18): 8 concurrent runs of each writing command
# share their output names. Each run differs in one input, so the 8 complete outputs
# differ; after the race every shared output must be byte for byte the output of one of
# the runs (its SHA-256 taken from a run alone), every run must succeed (an output the
# user names replaces the earlier one, docs/cli.md), calibrate must have written 8
# complete model files under 8 names (never replacing one another), and no temporary
# file may be left. The rounds repeat STAGECAL_RACE_ROUNDS times (default 1).
#   sh test_race.sh <stagecal-binary> <repo-root>
set -u
S=$1
root=$2
check=$(dirname "$S")/tests/tool_modelcheck
col=$root/datasets/columns/demo_benzene_toluene.json
logs=$root/datasets/demo/logs
rounds=${STAGECAL_RACE_ROUNDS:-1}
[ -x "$check" ] || { echo "missing $check (build the tests)"; exit 1; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fail=0
N=8

# the form is fixed: predict below states no vapour load, whatever form AICc ranks first
"$S" calibrate --quiet --column "$col" --form saturating --fits "$work/fits" "$logs/2025-01.csv" \
    "$logs/2025-02.csv" >/dev/null 2>&1 || { echo "calibrate failed"; exit 1; }
model=$(ls "$work"/fits/*/*.json)

# Run k (1..8) of each kind, writing $2.
# (positional parameters only: a function's variables are the caller's in sh)
run_k() {
    case $1 in
    invert) "$S" invert --quiet --column "$col" --out "$2" "$logs/2025-0$3.csv" ;;
    predict) "$S" predict --quiet --model "$model" --charge $((20 + $3)) --xb0 0.5 --boilup 3.6 \
        --reflux 3 --cut pot-x=0.15 --samples 0 --out "$2" ;;
    plot) "$S" plot mccabe --alpha 2.5 --xd 0.9$3 --reflux 3 --stages 6 --output "$2" --quiet ;;
    report) "$S" report "$model" --points "$work/pts$3.csv" --output "$2" --quiet ;;
    calibrate) "$S" calibrate --quiet --column "$col" --fits "$work/cfits" --samples-out "$2" \
        --points-out "$2.pts" --form constant "$logs/2025-0$3.csv" "$logs/2025-0$(($3 + 1)).csv" ;;
    esac
}
sha() { sha256sum "$1" 2>/dev/null | cut -d' ' -f1; }

# points files for the report runs: one window more in each
k=1
while [ "$k" -le "$N" ]; do
    printf 'R,stages\n' >"$work/pts$k.csv"
    j=0
    while [ "$j" -le "$k" ]; do printf '%d,%d.%d\n' $((2 + j)) 8 "$j" >>"$work/pts$k.csv"; j=$((j + 1)); done
    k=$((k + 1))
done

for kind in invert predict plot report calibrate; do
    d=$work/$kind
    mkdir -p "$d"
    case $kind in plot) ext=png ;; report) ext=html ;; *) ext=csv ;; esac
    # the 8 possible outputs, each from a run alone
    : >"$work/refs"
    : >"$work/refs.pts"
    k=1
    while [ "$k" -le "$N" ]; do
        run_k $kind "$d/ref.$ext" $k >/dev/null 2>&1 || { echo "FAIL $kind: run $k alone failed"; fail=1; }
        sha "$d/ref.$ext" >>"$work/refs"
        [ "$kind" = calibrate ] && sha "$d/ref.$ext.pts" >>"$work/refs.pts"
        k=$((k + 1))
    done
    rm -rf "$d"/ref.* "$work/cfits"
    [ "$(sort -u "$work/refs" | wc -l)" -eq "$N" ] || { echo "FAIL $kind: the $N runs do not differ"; fail=1; }
    r=0
    while [ "$r" -lt "$rounds" ]; do
        out=$d/shared.$ext
        k=1
        pids=""
        while [ "$k" -le "$N" ]; do
            run_k $kind "$out" $k >/dev/null 2>"$d/err$k" &
            pids="$pids $!"
            k=$((k + 1))
        done
        k=1
        for p in $pids; do
            wait "$p" || { echo "FAIL $kind round $r: run $k failed"; cat "$d/err$k"; fail=1; }
            k=$((k + 1))
        done
        grep -qx "$(sha "$out")" "$work/refs" || { echo "FAIL $kind round $r: '$out' is not the output of one run"; fail=1; }
        if [ "$kind" = calibrate ]; then
            grep -qx "$(sha "$out.pts")" "$work/refs.pts" || { echo "FAIL calibrate round $r: points file mixed"; fail=1; }
            n=$(ls "$work"/cfits/*/*.json | wc -l)
            [ "$n" -eq $(((r + 1) * N)) ] || { echo "FAIL calibrate round $r: $n model files, expected $(((r + 1) * N))"; fail=1; }
            for m in $(ls "$work"/cfits/*/*.json); do
                "$check" "$m" || { echo "FAIL calibrate round $r: '$m' is not a complete model"; fail=1; }
            done
            [ -z "$(ls -A "$work"/cfits/*/ | grep '^\.')" ] || { echo "FAIL calibrate: temporary files left"; fail=1; }
        fi
        left=$(ls -A "$d" | grep -v '^err' | grep -v "^shared\.$ext" || true)
        [ -z "$left" ] || { echo "FAIL $kind round $r: left behind: $left"; fail=1; }
        r=$((r + 1))
    done
    echo "$kind: $rounds round(s) of $N racing runs: every output complete and from one run"
done
[ "$fail" -eq 0 ] || exit 1
echo "all passed"
