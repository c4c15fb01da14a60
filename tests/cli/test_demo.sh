# SPDX-License-Identifier: MIT
# `make demo` must always pass: run demo/run on a tiny scene in a temporary folder
# (every stage that exists in this build runs, so this grows with the pipeline).
. "$(dirname "$0")/lib.sh"

build=$(dirname "$SINEW_BIN")
if SINEW_BUILD="$build" SINEW_DEMO_OUT="$T/demo" SINEW_DEMO_FRAMES=3 SINEW_DEMO_PAIRS=1 \
    SINEW_DEMO_SIZE=96x72 sh demo/run >"$T/out" 2>&1; then
    if grep -q '^demo: done' "$T/out" && [ -f "$T/demo/scene/sequence.json" ]; then
        pass "demo/run passes on a small scene"
    else fail "demo/run" "no summary: $(tail -c 300 "$T/out")"; fi
else fail "demo/run" "exit $?: $(tail -c 400 "$T/out")"; fi
if grep -q '^truth 0->1: ' "$T/out"; then pass "demo/run prints the ground-truth summary"
else fail "demo/run summary" "$(head -c 300 "$T/out")"; fi
