#!/bin/sh
# test_readme.sh — the README's demo commands, as written, must run. It takes the stagecal
# command of quick start (a) (the part after the build) and every command of the block
# under "## More on the demo data", and runs them with `sh -e` in a scratch directory
# that holds only datasets/ (a link to the repository's) and build/stagecal (a link to
# the program under test), so fits/ and the HTML files land in the scratch directory.
# A command that fails (non-zero exit) fails the test and names the line.
#   sh test_readme.sh <stagecal-binary> <repo-root>
set -u
BIN=$1
ROOT=$2
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
mkdir -p "$tmp/build" && ln -s "$BIN" "$tmp/build/stagecal" && ln -s "$ROOT/datasets" "$tmp/datasets" ||
    exit 1

# (a): the first fenced block under "## Quick start"; keep its ./build/stagecal command.
awk '/^## Quick start/ { q = 1 } q && /^```sh/ { f = 1; next } f && /^```/ { exit } f' \
    "$ROOT/README.md" | sed -n 's/.*&& \(\.\/build\/stagecal .*\)$/\1/p' >"$tmp/quick.sh"
# The demo block: the first fenced block under "## More on the demo data".
awk '/^## More on the demo data/ { q = 1 } q && /^```sh/ { f = 1; next } f && /^```/ { exit } f' \
    "$ROOT/README.md" >"$tmp/demo.sh"
fails=0
for part in quick demo; do
    n=$(grep -c '\./build/stagecal' "$tmp/$part.sh")
    if [ "$n" -eq 0 ]; then
        echo "FAIL $part: no stagecal command found in README.md"
        fails=$((fails + 1))
        continue
    fi
    # -x: the trace shows which line failed
    if (cd "$tmp" && sh -e -x "$part.sh" >"$part.out" 2>"$part.err"); then
        echo "ok   $part: $n stagecal commands"
    else
        echo "FAIL $part: README commands stop with an error:"
        tail -n 8 "$tmp/$part.err"
        fails=$((fails + 1))
    fi
done
# what the demo must have produced (README's own promises)
[ -s "$tmp/demo-report.html" ] || { echo "FAIL: quick start wrote no demo-report.html"; fails=$((fails + 1)); }
[ -s "$tmp/demo-2025-11.html" ] || { echo "FAIL: demo wrote no demo-2025-11.html"; fails=$((fails + 1)); }
nfits=$(ls "$tmp"/fits/demo-bt-K-7/*.json 2>/dev/null | wc -l)
nlogs=$(ls "$ROOT"/datasets/demo/logs/*.csv | wc -l)
# one fit from the quick start, one per monthly log that can determine the form (the
# loop echoes "no fit for LOG" for a month calibrate refuses)
nskip=$(grep -c '^no fit for ' "$tmp/demo.out")
if [ "$nfits" -eq $((nlogs + 1 - nskip)) ] && [ "$nskip" -le 4 ]; then
    echo "ok   $nfits model files ($nskip months refused)"; else
    echo "FAIL: $nfits model files, expected $((nlogs + 1 - nskip)), $nskip refused (at most 4)"
    fails=$((fails + 1)); fi
# the README quotes the quick start's output and its report's page one: each quoted
# fragment must be in README.md and in what the program wrote (a README that drifts from
# the program fails here)
check_quote() { # file fragment
    if ! grep -qF -- "$2" "$ROOT/README.md"; then
        echo "FAIL: README.md no longer quotes '$2'"; fails=$((fails + 1))
    elif ! grep -qF -- "$2" "$1"; then
        echo "FAIL: README.md quotes '$2', $(basename "$1") does not say it"; fails=$((fails + 1))
    fi
}
check_quote "$tmp/quick.out" "the largest difference, in 1, is 0.16 combined standard errors"
for q in "INVENTED DEMO DATA" "The answer: stages at R = 5, F = 1.54 Pa^0.5" \
    "9.24 (95 % confidence interval 9.02 – 9.46)" "5.54 – 12.93 (95 % prediction interval)" \
    "0.546 m (95 % interval 0.532 – 0.561 m), packed height 4.5 m" \
    "Precision: the stage count at this condition is known to ±0.22 stages" \
    "2025-01-06 15:43 to 2025-03-27 10:25 UTC" "Prepared by" "Approved by"; do
    check_quote "$tmp/demo-report.html" "$q"
done
[ "$fails" -eq 0 ]
