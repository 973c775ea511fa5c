# compare_invert.sh OLD_BIN NEW_BIN ROOT [ALPHA_LOG NRTL_LOG]
# Every output of `invert` and `check` of OLD_BIN against NEW_BIN, byte for byte (cmp): for
# each column file in ROOT/datasets/columns and each demo log, alone and all fourteen at once,
# the invert CSV, invert --json, check's text and check --json, with the messages on standard
# error and the exit codes; the new build's CSV also with --threads 0, 1 and 2 against the old
# build's default. With ALPHA_LOG and NRTL_LOG (the bench logs: tests/bench_invert.c writes
# them) also those, with their column files (demo_alpha, kestrel_c3_ethanol_water).
# Prints the differing files and "N files compared, M differ"; exit 1 when any differs.
# NOTE_ONCE=1 (OLD_BIN from before the F-factor note was said once, docs/runlog.md): a file
# that differs is compared again with the old CSV's note "no F-factor (needs V, …)" removed
# and the new --json's "no_f_factor" member removed; those equal are listed as "SAME WITH THE
# NOTE SAID ONCE" and do not count as differing.
OLD=$1
NEW=$2
ROOT=$3
W=$(mktemp -d)
trap 'rm -rf "$W"' EXIT
mkdir -p "$W/o" "$W/n"
D=$ROOT/datasets
# run WHO NAME ARGS...: one command's stdout, stderr and exit code into WHO/NAME.*
run() {
    rw=$1 rn=$2
    shift 2
    bin=$OLD
    [ "$rw" = n ] && bin=$NEW
    "$bin" "$@" >"$W/$rw/$rn.out" 2>"$W/$rw/$rn.err"
    echo "rc $?" >>"$W/$rw/$rn.err"
}
# both NAME LOG...: the four outputs of both builds for one column ($col) and the logs
both() {
    name=$1
    shift
    for who in o n; do
        rm -f "$W/out.csv" # (one path for both builds: messages may name it)
        run "$who" "$name.inv" invert --quiet --column "$col" --output "$W/out.csv" "$@"
        mv "$W/out.csv" "$W/$who/$name.csv" 2>/dev/null
        run "$who" "$name.invj" invert --quiet --column "$col" --json "$@"
        run "$who" "$name.chk" check --column "$col" "$@"
        run "$who" "$name.chkj" check --column "$col" --json "$@"
    done
    for t in 0 1 2; do
        "$NEW" invert --quiet --threads $t --column "$col" --output "$W/n/$name.t$t.csv" "$@" \
            >/dev/null 2>&1
        [ -f "$W/o/$name.csv" ] && cp "$W/o/$name.csv" "$W/o/$name.t$t.csv"
    done
}
for col in "$D"/columns/*.json; do
    c=$(basename "$col" .json)
    for log in "$D"/demo/logs/*.csv; do
        both "$c.$(basename "$log" .csv)" "$log"
    done
    both "$c.all" "$D"/demo/logs/*.csv
done
if [ $# -ge 5 ]; then
    col=$D/columns/demo_alpha.json
    both bench.alpha "$4"
    col=$D/columns/kestrel_c3_ethanol_water.json
    both bench.nrtl "$5"
fi
NOTE='"no F-factor (needs V, diameter, molar masses and a temperature)"'
# once OLD NEW: the two equal but for the note said once (NOTE_ONCE)
once() {
    [ "${NOTE_ONCE:-0}" = 1 ] || return 1
    case $1 in
    *.csv) sed "s/,$NOTE,/,,/" "$1" | cmp -s - "$2" ;;
    *.invj.out) grep -v '^  "no_f_factor": ' "$2" | cmp -s "$1" - ;;
    *) return 1 ;;
    esac
}
n=0
bad=0
nonce=0
for f in "$W"/o/*; do
    n=$((n + 1))
    g=$W/n/$(basename "$f")
    if cmp -s "$f" "$g"; then
        :
    elif once "$f" "$g"; then
        echo "SAME WITH THE NOTE SAID ONCE: $(basename "$f")"
        nonce=$((nonce + 1))
    else
        echo "DIFFERS: $(basename "$f")"
        bad=$((bad + 1))
    fi
done
[ "${NOTE_ONCE:-0}" = 1 ] && echo "$nonce files the same with the note said once"
echo "$n files compared, $bad differ"
[ "$bad" -eq 0 ]
