# Bad command-line input to `steps` and `invert`: exit 2, one message on stderr naming the
# option and what was expected, nothing on stdout (the exit codes of docs/cli.md).
BIN=$1
. "$(dirname "$0")/lib.sh"

I="$BIN invert --alpha 2.5 --reflux 4"
S="$BIN steps --alpha 2.5 --reflux 4"
expect_exit 2 "option '--xd': 1.2 is outside (0, 1)" -- $I --xd 1.2 --xb 0.2
expect_exit 2 "option '--xd': 0 is outside (0, 1)" -- $I --xd 0 --xb 0.2
expect_exit 2 "option '--xb': -0.1 is outside (0, 1)" -- $I --xd 0.9 --xb -0.1
expect_exit 2 "option '--xb': 0.95 is not below --xd 0.9" -- $I --xd 0.9 --xb 0.95
expect_exit 2 "option '--xb': 0.9 is not below --xd 0.9" -- $I --xd 0.9 --xb 0.9
expect_exit 2 "option '--alpha': 0.9 is outside (1, inf)" -- $BIN invert --alpha 0.9 --reflux 4 --xd 0.9 --xb 0.1
expect_exit 2 "option '--alpha': 1 is outside (1, inf)" -- $BIN invert --alpha 1 --reflux 4 --xd 0.9 --xb 0.1
expect_exit 2 "option '--kvalue': 0.5 is outside (1, inf)" -- $BIN invert --kvalue 0.5 --reflux 4 --xd 0.1 --xb 0.01
expect_exit 2 "option '--reflux': -1 is negative" -- $BIN invert --alpha 2 --reflux -1 --xd 0.9 --xb 0.1
expect_exit 2 "option '--murphree': 1.5 is outside (0, 1]" -- $I --xd 0.9 --xb 0.1 --murphree 1.5
expect_exit 2 "option '--murphree': 0 is outside (0, 1]" -- $I --xd 0.9 --xb 0.1 --murphree 0
expect_exit 2 "option '--stages': 0.5 is below 1" -- $S --xd 0.9 --stages 0.5
expect_exit 2 "option '--xd': 'nan' is not a number" -- $I --xd nan --xb 0.1
expect_exit 2 "option '--xd': '1e' is not a number" -- $I --xd 1e --xb 0.1
expect_exit 2 "option '--xd': '0.9x' is not a number" -- $I --xd 0.9x --xb 0.1
expect_exit 2 "option '--xb': '' is not a number" -- $I --xd 0.9 --xb ""
expect_exit 2 "option '--reflux': 'infinite' is not a number" -- $BIN invert --alpha 2 --reflux infinite --xd 0.9 --xb 0.1
expect_exit 2 "option '--stages': 'seven' is not a number" -- $S --xd 0.9 --stages seven
expect_exit 2 "unknown option '--foo'" -- $I --xd 0.9 --xb 0.1 --foo
expect_exit 2 "unknown option '-x'" -- $I --xd 0.9 --xb 0.1 -x
expect_exit 2 "option '--stages' needs a value" -- $S --xd 0.9 --stages
expect_exit 2 "option '--xb' is required" -- $I --xd 0.9
expect_exit 2 "one of '--alpha', '--kvalue' or '--column' is required" -- $BIN invert --xd 0.9 --xb 0.1 --reflux 2
expect_exit 2 "exclude each other" -- $BIN invert --alpha 2 --kvalue 3 --xd 0.9 --xb 0.1 --reflux 2
expect_exit 2 "'frobnicate' is not a command" -- $BIN frobnicate
expect_exit 0 "" -- $BIN invert --help
expect_exit 0 "" -- $BIN steps --help
expect_exit 0 "" -- $BIN --version
finish
