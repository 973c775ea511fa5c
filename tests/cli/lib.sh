# lib.sh — helpers for binary-level CLI tests (POSIX sh). Source it after setting BIN.
fails=0
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

# expect_exit CODE EXPECTED_STDERR_SUBSTRING -- command args…
# Runs the command, checks its exit code, that stderr contains the text (when given)
# and, for a non-zero code, that nothing was written to stdout and stderr holds exactly
# one line. Use "--many" instead of "--" when several lines (findings) are expected.
expect_exit() {
    want=$1; text=$2; sep=$3; shift 3
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -ne "$want" ]; then
        echo "FAIL: exit $got, want $want: $*"; cat "$tmp/err"; fails=$((fails + 1)); return
    fi
    if [ -n "$text" ] && ! grep -qF -- "$text" "$tmp/err"; then
        echo "FAIL: stderr lacks '$text': $*"; cat "$tmp/err"; fails=$((fails + 1)); return
    fi
    if [ "$want" -ne 0 ] && [ -s "$tmp/out" ]; then
        echo "FAIL: stdout not empty on error: $*"; fails=$((fails + 1)); return
    fi
    if [ "$want" -ne 0 ] && [ "$sep" != "--many" ] && [ "$(wc -l <"$tmp/err")" -ne 1 ]; then
        echo "FAIL: want exactly one line on stderr: $*"; cat "$tmp/err"; fails=$((fails + 1)); return
    fi
    echo "ok: $*"
}

finish() {
    if [ "$fails" -ne 0 ]; then echo "$fails failure(s)"; exit 1; fi
    echo "all passed"
}
