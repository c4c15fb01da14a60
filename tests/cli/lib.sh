# SPDX-License-Identifier: MIT
# Helpers for end-to-end tests of the real binary. Source it from tests/cli/test_*.sh.
# Each check prints "PASS: name", "FAIL: name: why" or "SKIP: name: why"; tests/run counts them.
set -u
: "${SINEW_BIN:=build/sinew}"
: "${PYTHON:=/usr/bin/python3}"
: "${SINEW_DATA:=../shared/data}"
T=$(mktemp -d "${TMPDIR:-/tmp}/sinew-cli.XXXXXX")
trap 'rm -rf "$T"' EXIT

pass() { echo "PASS: $1"; }
fail() { echo "FAIL: $1: $2"; }
skip() { echo "SKIP: $1: $2"; }

# expect_ok NAME CMD...: the command exits 0.
expect_ok() {
    n=$1; shift
    if "$@" >"$T/out" 2>"$T/err"; then pass "$n"; else fail "$n" "exit $? ($(head -c 300 "$T/err"))"; fi
}

# expect_error NAME OUTFILE PATTERN CMD...: the command exits non-zero, prints exactly one
# line on stderr matching PATTERN (grep -E), and OUTFILE (if not "-") does not exist.
expect_error() {
    n=$1; o=$2; pat=$3; shift 3
    "$@" >"$T/out" 2>"$T/err"; rc=$?
    lines=$(wc -l <"$T/err")
    if [ "$rc" -eq 0 ]; then fail "$n" "exit 0, expected failure"; return; fi
    if [ "$rc" -ge 128 ]; then fail "$n" "killed by signal (exit $rc): $(head -c 300 "$T/err")"; return; fi
    if [ "$lines" -ne 1 ]; then fail "$n" "expected one stderr line, got $lines: $(head -c 300 "$T/err")"; return; fi
    if ! grep -Eq -- "$pat" "$T/err"; then fail "$n" "stderr '$(cat "$T/err")' does not match '$pat'"; return; fi
    if [ "$o" != "-" ] && [ -e "$o" ]; then fail "$n" "output $o was left behind"; return; fi
    if [ "$o" != "-" ] && ls "$(dirname "$o")" 2>/dev/null | grep -q '\.tmp-'; then
        fail "$n" "temporary file left in $(dirname "$o")"; return; fi
    pass "$n"
}

# have_data SUBDIR: true if the shared data folder has it.
have_data() { [ -d "$SINEW_DATA/$1" ]; }
