#!/bin/sh
# compare.sh BUILD_DIR [ALPHA_ROWS] [NRTL_ROWS] [OLD_BUILD_DIR] — stagecal against the
# numpy peers (and, when given, against an older stagecal build), in one
# run on one machine (only the ratios mean anything). For each model: bench_invert
# writes the run log and times the compute part; then `stagecal invert --column C --out`
# and the peer (tests/peers/invert_*.py) run on that log, whole process, under
# /usr/bin/time (wall, user+sys CPU, peak RSS). The peer's output is checked against
# stagecal's (same rows ok; stages equal to within 1e-3 of their standard uncertainty u(N):
# the peer's NRTL table is interpolated linearly, which near a pinch moves N by ~1e-3). Results: docs/performance.md. Needs a Release build:
#   cmake -S . -B build-rel -DCMAKE_BUILD_TYPE=Release && cmake --build build-rel -j2
#   sh tests/peers/compare.sh build-rel 1000000 100000
set -eu
build=$(cd "$1" && pwd)
na=${2:-1000000}
nn=${3:-100000}
old=${4:-}
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT INT TERM
py=/usr/bin/python3

timed() { # label command...: prints "label wall_s cpu_s rss_MB"
    label=$1
    shift
    /usr/bin/time -f "%e %U %S %M" -o "$tmp/time" "$@" >"$tmp/out" 2>"$tmp/err" ||
        { cat "$tmp/err" >&2; exit 1; }
    read -r wall user sys rss <"$tmp/time"
    echo "$label $wall $(echo "$user + $sys" | bc) $(echo "scale=1; $rss / 1024" | bc)"
}

one() { # model rows column peer
    model=$1 rows=$2 column=$3 peer=$4
    echo "== $model, $rows rows"
    "$build/tests/bench_invert" "$model" "$rows" "$tmp/log.csv" | sed 's/^/bench_invert: /'
    rm -f "$tmp/sc.csv"
    s=$(timed stagecal "$build/stagecal" invert --quiet --column "$column" --output "$tmp/sc.csv" \
        "$tmp/log.csv")
    p=$(timed numpy "$py" "$peer" "$tmp/log.csv" "$tmp/np.csv")
    sed 's/^/peer: /' "$tmp/err"
    if [ -n "$old" ]; then
        rm -f "$tmp/old.csv"
        o=$(timed stagecal-old "$old/stagecal" invert --quiet --column "$column" \
            --output "$tmp/old.csv" "$tmp/log.csv")
        echo "older build: $o" | awk '{ print; }'
    fi
    echo "whole process (label wall[s] cpu[s] peakRSS[MB]): $s | $p"
    echo "$s $p" | awk '{ printf "ratio numpy/stagecal: wall %.2fx, cpu %.2fx\n", $6 / $2, $7 / $3 }'
    "$py" - "$tmp/sc.csv" "$tmp/np.csv" <<'PY'
import csv, sys
a = {(r["run"], float(r["time[s]"])): r for r in csv.DictReader(open(sys.argv[1]))}
worst, rel, both, only = 0.0, 0.0, 0, 0
for r in csv.DictReader(open(sys.argv[2])):
    s = a[(r["run"], float(r["time[s]"]))]
    if (s["status"] == "ok") != (r["status"] == "ok"):
        only += 1
    elif s["status"] == "ok":
        both += 1
        d = abs(float(s["stages"]) - float(r["stages"]))
        worst = max(worst, d)
        rel = max(rel, d / float(s["u_stages"]))
print(f"agreement: {both} rows ok in both, {only} ok in one only, worst |dN| {worst:.2e}, "
      f"worst |dN|/u(N) {rel:.2e}")
# the same work: same rows ok, and stages equal to well within their uncertainty
assert only == 0 and rel < 1e-3
PY
}

echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //'); load $(cut -d' ' -f1-3 /proc/loadavg)"
one alpha "$na" "$root/datasets/columns/demo_alpha.json" "$here/invert_alpha.py"
one nrtl "$nn" "$root/datasets/columns/kestrel_c3_ethanol_water.json" "$here/invert_nrtl.py"
