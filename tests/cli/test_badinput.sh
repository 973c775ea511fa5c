#!/bin/sh
# test_badinput.sh — runs every entry of the bad-input catalogue (tests/badinput/catalogue.txt,
# described in docs/bad-inputs.md) and checks, for each, the exact exit code, the exact
# stderr and the stdout line the catalogue names. The catalogue records what the program
# does today; entries whose behaviour is a known defect say so in docs/bad-inputs.md.
#   sh test_badinput.sh <stagecal-binary> <repo-root>
set -u
S=$1
root=$2
cd "$root" || exit 1
LC_ALL=C
export LC_ALL
work=$(mktemp -d)
trap 'chmod -R u+rwx "$work" 2>/dev/null; rm -rf "$work"' EXIT
# Split the catalogue into one directory per entry: run, exit, err (expected stderr), out.
awk -v dir="$work" '
    /^== / { n++; d = sprintf("%s/e%03d", dir, n); system("mkdir " d); id = substr($0, 4);
             print id > (d "/id"); printf "" > (d "/err"); printf "" > (d "/out"); next }
    n == 0 || /^#/ { next }
    /^run: /  { print substr($0, 6) > (d "/run"); next }
    /^exit: / { print substr($0, 7) > (d "/exit"); next }
    /^err: /  { print substr($0, 6) > (d "/err"); next }
    /^out: /  { print substr($0, 6) > (d "/out"); next }
    /^root: skip/ { print "" > (d "/rootskip"); next }
' tests/badinput/catalogue.txt
uid=$(id -u)
total=0
failed=0
skipped=0
for d in "$work"/e*; do
    id=$(cat "$d/id")
    total=$((total + 1))
    if [ -f "$d/rootskip" ] && [ "$uid" -eq 0 ]; then
        skipped=$((skipped + 1))
        continue
    fi
    T=$(mktemp -d "$work/t.XXXXXX")
    export S T
    sh -c "$(cat "$d/run")" >"$d/got.out" 2>"$d/got.err.raw" </dev/null
    rc=$?
    # (a coverage build adds libgcov lines when the file-size limit stops its .gcda writes)
    sed -e "s|$T|\$T|g" -e '/^libgcov profiling error/d' "$d/got.err.raw" >"$d/got.err"
    sed -i "s|$T|\$T|g" "$d/got.out"
    chmod -R u+rwx "$T"
    want=$(cat "$d/exit")
    bad=""
    [ "$rc" = "$want" ] || bad="exit $rc, expected $want"
    if ! cmp -s "$d/got.err" "$d/err"; then
        bad="$bad${bad:+; }stderr differs:
$(diff "$d/err" "$d/got.err")"
    fi
    if [ -s "$d/out" ]; then
        while IFS= read -r line; do
            grep -qxF -- "$line" "$d/got.out" || bad="$bad${bad:+; }stdout lacks: $line"
        done <"$d/out"
    fi
    if [ -n "$bad" ]; then
        failed=$((failed + 1))
        echo "FAIL $id: $bad"
    fi
done
echo "bad-input catalogue: $total entries, $((total - failed - skipped)) pass, $failed fail, $skipped skipped (root)"
[ "$total" -ge 40 ] || { echo "catalogue has fewer than 40 entries"; exit 1; }
[ "$failed" -eq 0 ]
