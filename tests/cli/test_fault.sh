#!/bin/sh
# test_fault.sh — nothing lost, nothing half-written (issue 18). Every command that writes
# a file (invert --out, predict --out, report --output, plot --output, calibrate
# --samples-out/--points-out/--report and its model file) is
#   1. killed with SIGKILL at STAGECAL_FAULT_KILLS random moments of its run (default 6;
#      the `slow` variant in tests/CMakeLists.txt runs 30), and
#   2. run on a "full disk": RLIMIT_FSIZE (ulimit -f) of 1, 2, 4 and 8 blocks, SIGXFSZ
#      ignored, so write() fails with EFBIG as it fails with ENOSPC on a full disk.
# After every kill the output's final name holds either the earlier file, byte for byte,
# or the complete new output (the SHA-256 of an uninterrupted run). On a full disk the
# command exits 73, the earlier file is unchanged, and no file of the run is left
# (calibrate: no model file either). A hidden temporary file left by a kill in the short
# step between linking a finished output in and renaming it over the target is counted
# and reported (litter, not data loss); any other file left is a failure.
#   sh test_fault.sh <stagecal-binary> <repo-root>
set -u
S=$1
root=$2
check=$(dirname "$S")/tests/tool_modelcheck
col=$root/datasets/columns/demo_benzene_toluene.json
log1=$root/datasets/demo/logs/2025-01.csv
log2=$root/datasets/demo/logs/2025-02.csv
kills=${STAGECAL_FAULT_KILLS:-6}
[ -x "$check" ] || { echo "missing $check (build the tests)"; exit 1; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fail=0

# the form is fixed: predict below states no vapour load, whatever form AICc ranks first
"$S" calibrate --quiet --column "$col" --form saturating --fits "$work/fits" "$log1" "$log2" \
    >/dev/null 2>&1 ||
    { echo "calibrate failed"; exit 1; }
model=$(ls "$work"/fits/*/*.json)

# The command of each kind, writing to $1 (and, for calibrate, $1.pts and $1.html and a
# model file under $work/cfits).
# It execs, so that the pid of "run_cmd … &" is the command's own (kill -KILL reaches it);
# call it in a subshell otherwise. Positional parameters only: a function's variables
# are the caller's in sh.
run_cmd() {
    case $1 in
    invert) exec "$S" invert --quiet --column "$col" --out "$2" "$log1" ;;
    predict) exec "$S" predict --quiet --model "$model" --charge 25 --xb0 0.5 --boilup 3.6 \
        --reflux 3 --cut pot-x=0.15 --samples 0 --out "$2" ;;
    report) exec "$S" report "$model" --output "$2" --quiet ;;
    plot) exec "$S" plot model "$model" --output "$2" --quiet ;;
    calibrate) exec "$S" calibrate --quiet --column "$col" --fits "$work/cfits" --samples-out "$2" \
        --points-out "$2.pts" --report "$2.html" "$log1" "$log2" ;;
    esac
}

sha() { sha256sum "$1" 2>/dev/null | cut -d' ' -f1; }
now_us() { echo $(($(date +%s%N) / 1000)); }
# Visible and hidden entries of a folder, one per line.
entries() { ls -A "$1"; }

for kind in invert predict report plot calibrate; do
    d=$work/$kind
    mkdir -p "$d"
    case $kind in plot) ext=png ;; report) ext=html ;; *) ext=csv ;; esac
    out=$d/out.$ext
    # reference: one uninterrupted run, timed
    t0=$(now_us)
    (run_cmd $kind "$d/ref.$ext") >/dev/null 2>&1 || { echo "FAIL $kind: reference run failed"; fail=1; continue; }
    t1=$(now_us)
    run_us=$((t1 - t0))
    ref=$(sha "$d/ref.$ext")
    [ "$kind" = calibrate ] && { refp=$(sha "$d/ref.$ext.pts"); rm -f "$work"/cfits/*/*.json; }
    rm -f "$d"/ref.*
    earlier() {
        for f in "$out" "$out.pts" "$out.html"; do printf 'earlier output\n' >"$f"; done
        [ "$kind" = calibrate ] || rm -f "$out.pts" "$out.html"
    }
    earlier
    old=$(sha "$out")
    entries "$d" >"$work/before.list"
    n_old=0 n_new=0 i=0 litter=0
    while [ "$i" -lt "$kills" ]; do
        # a random moment in [0, 1.3 x the timed run]
        delay_us=$(awk -v s=$((i * 131 + ${#kind})) -v r="$run_us" 'BEGIN { srand(s); print int(rand() * 1.3 * r) }')
        run_cmd $kind "$out" >/dev/null 2>&1 &
        pid=$!
        sleep "$(printf '%d.%06d' $((delay_us / 1000000)) $((delay_us % 1000000)))"
        kill -KILL "$pid" 2>/dev/null
        wait "$pid" 2>/dev/null
        now=$(sha "$out")
        if [ "$now" = "$old" ]; then
            n_old=$((n_old + 1))
        elif [ "$now" = "$ref" ]; then
            n_new=$((n_new + 1))
        else
            echo "FAIL $kind kill $i after ${delay_us} us: '$out' is neither the earlier nor a complete output"
            fail=1
        fi
        if [ "$kind" = calibrate ]; then
            p=$(sha "$out.pts")
            [ "$p" = "$old" ] || [ "$p" = "$refp" ] || { echo "FAIL calibrate kill $i: points file damaged"; fail=1; }
            tail -c 8 "$out.html" | grep -q '</html>' || grep -qx 'earlier output' "$out.html" ||
                { echo "FAIL calibrate kill $i: report damaged"; fail=1; }
            for m in $(ls "$work"/cfits/*/*.json 2>/dev/null); do
                "$check" "$m" || { echo "FAIL calibrate kill $i: '$m' is not a complete model"; fail=1; }
            done
            [ -z "$(ls -A "$work"/cfits/*/ 2>/dev/null | grep '^\.')" ] ||
                { echo "FAIL calibrate kill $i: temporary file left in the fits folder"; fail=1; }
        fi
        # A kill in the microseconds between linking the finished (unnamed) file in under a
        # hidden name and renaming it over the target leaves that hidden file: litter,
        # counted and reported, not data loss. Anything else left is a failure.
        n=$(entries "$d" | grep -c '^\.stagecal-tmp-' || true)
        litter=$((litter + n))
        rm -f "$d"/.stagecal-tmp-*
        if ! entries "$d" | cmp -s - "$work/before.list"; then
            echo "FAIL $kind kill $i: files other than the outputs left behind:"; entries "$d"; fail=1
        fi
        earlier
        i=$((i + 1))
    done
    echo "$kind: one run ${run_us} us; $kills kills: $n_old left the earlier file, $n_new the complete new one; hidden temporary files left: $litter"

    # full disk at several points of the output
    rm -f "$work"/cfits/*/*.json
    for lim in 1 2 4 8; do
        (trap '' XFSZ; ulimit -f $lim; run_cmd $kind "$out") >/dev/null 2>"$work/err"
        rc=$?
        if [ "$rc" -ne 73 ]; then
            echo "FAIL $kind full disk (ulimit -f $lim): exit $rc, expected 73"; cat "$work/err"; fail=1
        fi
        [ "$(sha "$out")" = "$old" ] || { echo "FAIL $kind full disk ($lim): the earlier file changed"; fail=1; }
        if ! entries "$d" | cmp -s - "$work/before.list"; then
            echo "FAIL $kind full disk ($lim): files left behind:"; entries "$d"; fail=1
        fi
        if [ "$kind" = calibrate ] && [ -n "$(ls -A "$work"/cfits/*/ 2>/dev/null)" ]; then
            echo "FAIL calibrate full disk ($lim): a model file of the failed run was kept"; fail=1
            rm -f "$work"/cfits/*/*.json
        fi
    done
    echo "$kind: full disk at 4 limits: exit 73, earlier file unchanged"
done
[ "$fail" -eq 0 ] || exit 1
echo "all passed"
