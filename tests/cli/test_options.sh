#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of the option names every command shares (issue 17): -o/--output for
# every command that writes one file or folder, -t/--threads for every command that
# computes, and one usage line with a "did you mean" for mistyped commands and options.
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"

# expect_usage NAME PATTERN CMD...: exit 2 and one stderr line matching PATTERN
expect_usage() {
    n=$1; pat=$2; shift 2
    "$@" >"$T/out" 2>"$T/err"; rc=$?
    if [ $rc -eq 2 ] && [ "$(wc -l <"$T/err")" -eq 1 ] && grep -Eq -- "$pat" "$T/err"; then
        pass "$n"
    else
        fail "$n" "exit $rc: $(head -c 300 "$T/err")"
    fi
}

for c in check draw flow match lift report run score stereo synth; do
    if "$B" $c --help | grep -q -- "-t, --threads N"; then pass "$c --help: -t, --threads"
    else fail "$c --help: -t, --threads" "not listed"; fi
done
for c in check draw flow match lift report run stereo synth; do
    if "$B" $c --help | grep -q -- "-o, --output"; then pass "$c --help: -o, --output"
    else fail "$c --help: -o, --output" "not listed"; fi
done

# -t and --output work; the older --out of draw still works (a unique prefix)
expect_ok "synth -t 1" "$B" synth -o "$T/s" -n 2 --size 64x48 -t 1
expect_ok "synth -j 1 (older short name)" "$B" synth -o "$T/s2" -n 2 --size 64x48 -j 1
if cmp -s "$T/s/color/000001.png" "$T/s2/color/000001.png"; then pass "synth -t and -j agree"
else fail "synth -t and -j agree" "outputs differ"; fi
expect_ok "draw --output -t 1" "$B" draw wheel --size 32 --output "$T/w1.png" -t 1
expect_ok "draw --out (prefix of --output)" "$B" draw wheel --size 32 --out "$T/w2.png"
if cmp -s "$T/w1.png" "$T/w2.png"; then pass "draw --out and --output agree"
else fail "draw --out and --output agree" "outputs differ"; fi

# mistakes: one usage line (exit 2) that says what to type
expect_usage "mistyped command: did you mean" "unknown command 'flwo' \(did you mean 'flow'\?\)" "$B" flwo
expect_usage "unknown command far from any" "unknown command 'xyzzy' \(see 'sinew --help'\)" "$B" xyzzy
expect_usage "mistyped option: did you mean" "run: unknown option '--threds' \(did you mean --threads\?\)" \
    "$B" run "$T/s" -o "$T/r" --threds 2
expect_usage "mistyped option (swap): did you mean" "flow: unknown option '--perset' \(did you mean --preset\?\)" \
    "$B" flow a b -o f.flo --perset fast
expect_usage "option missing its value" "flow: option '--preset' needs a value" "$B" flow a b -o f.flo --preset
expect_usage "short option missing its value" "synth: option '-o' \(--output\) needs a value" "$B" synth -o
expect_usage "ambiguous prefix names the candidates" "run: option '--re' is ambiguous \(--resume, --report\)" \
    "$B" run "$T/s" -o "$T/r" --re
expect_usage "value given to a flag" "run: option '--resume' takes no value" "$B" run "$T/s" -o "$T/r" --resume=1
[ -e "$T/r" ] && fail "usage errors write nothing" "$T/r exists" || pass "usage errors write nothing"
