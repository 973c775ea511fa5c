# Bad command-line input and missing inputs for `hetp` and `trend`: exit 2 (usage) or 66
# (input missing), one message on stderr naming the option or file, nothing on stdout
# (the exit codes of docs/cli.md). The numerical paths are tested in tests/test_hetp.c and
# tests/test_trend.c, which also run the binary on model files they write.
BIN=$1
. "$(dirname "$0")/lib.sh"

H="$BIN hetp"
T="$BIN trend"
expect_exit 2 "a model file is required" -- $H --reflux 4
expect_exit 2 "option '--reflux' is required" -- $H m.json
expect_exit 2 "option '--reflux': -1 is negative" -- $H m.json --reflux -1
expect_exit 2 "option '--level': 1.5 is outside (0, 1)" -- $H m.json --reflux 4 --level 1.5
expect_exit 2 "option '--packed-height': -2 is not positive" -- $H m.json --reflux 4 --packed-height -2
expect_exit 2 "option '--packing': 'rings' is unknown" -- $H m.json --reflux 4 --packing rings
expect_exit 2 "needs '--area A'" -- $H m.json --reflux 4 --packing structured
expect_exit 2 "needs '--size D'" -- $H m.json --reflux 4 --packing random
expect_exit 2 "need '--packing KIND'" -- $H m.json --reflux 4 --area 250
expect_exit 2 "option '--trays' excludes" -- $H m.json --reflux 4 --trays 12 --packed-height 3
expect_exit 2 "expected one or two model files" -- $H a.json b.json c.json --reflux 4
expect_exit 2 "option '--design-hetp': 'abc' is not a number" -- $H m.json --reflux 4 --design-hetp abc
expect_exit 2 "unknown option '--frob'" -- $H m.json --reflux 4 --frob
expect_exit 66 "" -- $H "$tmp/no-such-model.json" --reflux 4
expect_exit 2 "a column id is required" -- $T --reflux 4
expect_exit 2 "option '--reflux' is required" -- $T K-7
expect_exit 2 "option '--lambda': 1.5 is outside (0, 1]" -- $T K-7 --reflux 4 --lambda 1.5
expect_exit 2 "option '--limit': 0 is not positive" -- $T K-7 --reflux 4 --limit 0
expect_exit 2 "option '--require': 0.5 is below 1" -- $T K-7 --reflux 4 --require 0.5
expect_exit 2 "'../x' is not a column id" -- $T ../x --reflux 4
expect_exit 66 "cannot open '$tmp/fits/K-7'" -- $T K-7 --reflux 4 --fits "$tmp/fits"
mkdir -p "$tmp/fits/K-7"
expect_exit 66 "no model files in '$tmp/fits/K-7'" -- $T K-7 --reflux 4 --fits "$tmp/fits"
expect_exit 66 "$tmp/events.csv: cannot open" -- $T K-7 --reflux 4 --fits "$tmp/fits" --events "$tmp/events.csv"
printf 'time,column,kind\n2026-01-05,K-7,overhaul\n' >"$tmp/events.csv"
expect_exit 65 "events.csv:2: kind 'overhaul' is unknown" -- $T K-7 --reflux 4 --fits "$tmp/fits" --events "$tmp/events.csv"
expect_exit 0 "" -- $H --help
expect_exit 0 "" -- $T --help
finish
