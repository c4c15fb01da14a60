#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of what `sinew run` tells the user about its inputs (issue 17): warnings
# on stderr as they arise (implausible depth scale, off-centre or missing intrinsics, few
# kept pixels), each also in the pair's stats.json; the same intrinsics warning in `lift`.
# Inputs are the bundled generator's invented scene (`sinew synth`).
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"
OPT="--preset fast --progress plain"

if ! "$B" synth -o "$T/sc" --frames 3 --size 160x120 >/dev/null 2>"$T/err"; then
    fail "synth scene" "$(cat "$T/err")"
    exit 0
fi

# a clean scene (centred intrinsics, depth about 1 m) prints no warning at all
if "$B" run "$T/sc/sequence.json" -o "$T/clean" $OPT >"$T/out" 2>"$T/err" && [ ! -s "$T/err" ]; then
    pass "clean run: no warnings"
else
    fail "clean run: no warnings" "$(head -c 400 "$T/err")"
fi

# A 3x3 K calibrated for 320x240 (principal point at its centre, 159.5 119.5) used on
# 160x120 frames without its size: the principal point sits on the image corner. The
# warning names both sizes, the run still succeeds, stats.json keeps the warning.
mkdir -p "$T/fo"
cp -r "$T/sc/color" "$T/sc/depth" "$T/fo/"
echo '{"fx": 262.5, "fy": 262.5, "cx": 159.5, "cy": 119.5}' >"$T/fo/intrinsics.json"
"$B" run "$T/fo" -o "$T/r1" $OPT >"$T/out" 2>"$T/err"
rc=$?
if [ $rc -eq 0 ] && grep -q "warning: .*intrinsics.json: principal point (159.5, 119.5).*160x120 images.*320x240 frames" "$T/err" \
    && [ "$(grep -c warning "$T/err")" -eq 1 ]; then
    pass "off-centre intrinsics: one warning naming both sizes"
else
    fail "off-centre intrinsics: one warning naming both sizes" "rc $rc: $(head -c 400 "$T/err")"
fi
if grep -q "principal point" "$T/r1/pairs/000001-000002/stats.json"; then
    pass "off-centre intrinsics: warning in stats.json"
else
    fail "off-centre intrinsics: warning in stats.json" "$(head -c 300 "$T/r1/pairs/000001-000002/stats.json")"
fi
# the same K in lift
"$B" lift --flow "$T/r1/pairs/000000-000001/forward.flo" --depth0 "$T/sc/depth/000000.png" \
    --depth1 "$T/sc/depth/000001.png" --intrinsics 262.5,262.5,159.5,119.5 -o "$T/l.npy" >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && grep -q "lift: warning: .*principal point.*320x240" "$T/err"; then
    pass "lift: off-centre intrinsics warning"
else
    fail "lift: off-centre intrinsics warning" "$(head -c 300 "$T/err")"
fi

# depth maps but no intrinsics: matches stay 2-D, said once on stderr
rm "$T/fo/intrinsics.json"
"$B" run "$T/fo" -o "$T/r2" $OPT >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && grep -q "warning: the frames have depth maps but there are no intrinsics" "$T/err" \
    && [ "$(wc -l <"$T/err")" -eq 1 ]; then
    pass "missing intrinsics: one warning"
else
    fail "missing intrinsics: one warning" "$(head -c 400 "$T/err")"
fi

# A depth scale 100 times too small (10 codes per metre for millimetre PNGs): the median
# depth is about 100 m, outside 0.05-20 m. One warning per frame file, each printed once
# although every frame belongs to two pairs.
"$B" run "$T/sc/sequence.json" -o "$T/r3" $OPT --depth-scale 10 >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && [ "$(grep -c 'warning: .*depth/00000[0-2].png: median depth .* is outside 0.05-20 m' "$T/err")" -eq 3 ] \
    && [ "$(wc -l <"$T/err")" -eq 3 ]; then
    pass "depth scale: one warning per frame"
else
    fail "depth scale: one warning per frame" "$(head -c 600 "$T/err")"
fi

# at most 8 warnings are shown; the rest are counted in one closing line
if "$B" synth -o "$T/long" --frames 14 --size 96x72 >/dev/null 2>&1 &&
    "$B" run "$T/long/sequence.json" -o "$T/r4" $OPT --depth-scale 10 >"$T/out" 2>"$T/err" &&
    [ "$(grep -c 'median depth' "$T/err")" -eq 8 ] && [ "$(wc -l <"$T/err")" -eq 9 ] &&
    tail -1 "$T/err" | grep -q "more pair warnings not shown"; then
    pass "warnings capped at 8 plus a count"
else
    fail "warnings capped at 8 plus a count" "$(tail -3 "$T/err")"
fi

# --progress json: stdout stays pure JSON, warnings go to stderr
if "$B" run "$T/sc/sequence.json" -o "$T/r5" --preset fast --progress json --depth-scale 10 \
    >"$T/out" 2>"$T/err" && "$PYTHON" -c "
import json, sys
for line in open('$T/out'):
    json.loads(line)
" && grep -q "median depth" "$T/err"; then
    pass "json progress: warnings on stderr only"
else
    fail "json progress: warnings on stderr only" "$(head -c 300 "$T/out")"
fi
