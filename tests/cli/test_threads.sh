#!/bin/sh
# SPDX-License-Identifier: MIT
# Threads of the sinew command: waiting threads sleep instead of spinning unless the user
# chose a wait policy (tools/main.c), and the policy never changes an output.
. "$(dirname "$0")/lib.sh"

# libgomp prints its settings with OMP_DISPLAY_ENV=verbose; the last process's spin count
# is what the estimator ran with (0 = passive). Other runtimes or OPENMP=0: nothing to see.
spin() { env -u OMP_WAIT_POLICY -u GOMP_SPINCOUNT OMP_DISPLAY_ENV=verbose "$@" "$SINEW_BIN" --version 2>&1 |
    sed -n "s/.*GOMP_SPINCOUNT = '\([0-9]*\)'.*/\1/p" | tail -n1; }
s=$(spin)
if [ -z "$s" ]; then
    skip "passive wait policy by default" "no libgomp settings shown (OPENMP=0 build or another runtime)"
    skip "a user's wait policy is kept" "no libgomp settings shown"
else
    if [ "$s" = 0 ]; then pass "passive wait policy by default"; else fail "passive wait policy by default" "spin count $s"; fi
    s=$(spin OMP_WAIT_POLICY=active)
    if [ "$s" != 0 ]; then pass "a user's wait policy is kept"; else fail "a user's wait policy is kept" "spin count 0"; fi
    s=$(spin GOMP_SPINCOUNT=1234)
    if [ "$s" = 1234 ]; then pass "a user's spin count is kept"; else fail "a user's spin count is kept" "spin count $s"; fi
fi

# the same bytes whatever the policy
"$SINEW_BIN" synth -o "$T/s" --frames 2 --size 96x64 >/dev/null 2>&1
a="$T/s/color/000000.png" b="$T/s/color/000001.png"
env -u OMP_WAIT_POLICY "$SINEW_BIN" flow "$a" "$b" -o "$T/p.flo" --threads 2 2>/dev/null
OMP_WAIT_POLICY=active "$SINEW_BIN" flow "$a" "$b" -o "$T/a.flo" --threads 2 2>/dev/null
if [ -s "$T/p.flo" ] && cmp -s "$T/p.flo" "$T/a.flo"; then pass "wait policy leaves the flow unchanged"
else fail "wait policy leaves the flow unchanged" "files differ or missing"; fi
