#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew run` on a stereo folder (left/ + right/ + stereo_calib.json,
# issue 20): each frame's depth is computed by the stereo engine into OUTDIR/stereo/,
# compared here with the exact depth fx B / d of the demo scene's exact disparity
# (`sinew synth --stereo`, our invented scene); the pairs lift their matches with it;
# --resume reuses the cached depth maps and recomputes only the one whose right frame
# changed; the report shows each pair's disparity and depth; a missing right frame or
# calibration is one line naming the file. Maps are
# read with tests/cli/maps.py (standard library only).
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"
OPT="--preset fast --progress plain"
cp "$(dirname "$0")/maps.py" "$T/maps.py"
"$B" synth -o "$T/sc" --frames 3 --size 160x120 --stereo 0.05 >/dev/null 2>"$T/err" || {
    fail "synth --stereo scene" "$(cat "$T/err")"
    exit 0
}
mkdir -p "$T/st/left" "$T/st/right"
cp "$T"/sc/color/*.png "$T/st/left/"
cp "$T"/sc/right/*.png "$T/st/right/"
cp "$T/sc/stereo_calib.json" "$T/st/"

if "$B" run "$T/st" -o "$T/r" $OPT --report >"$T/out" 2>"$T/err" &&
    grep -q "stereo: 3 depth maps computed, 0 reused" "$T/out"; then
    pass "run on a stereo folder computes 3 depth maps"
else fail "run on a stereo folder computes 3 depth maps" "$(cat "$T/out" "$T/err" | head -c 400)"; fi
# the report shows each pair's disparity and depth pictures
if [ "$(grep -o '<figcaption>disparity</figcaption>' "$T/r/report.html" | wc -l)" -eq 2 ] &&
    [ "$(grep -o '<figcaption>depth</figcaption>' "$T/r/report.html" | wc -l)" -eq 2 ] &&
    ! grep -q 'no stereo map' "$T/r/report.html"; then
    pass "report shows disparity and depth per pair"
else fail "report shows disparity and depth per pair" "figures missing"; fi

# depth against the exact one, z = fx B / d_true, on pixels with a true disparity.
# Measured (160x120, synth's default seed, balanced stereo preset), frames 0/1/2: depth
# valid on 88.9/89.1/89.4 % of them (the rest: occluded or outside the right view, and
# check rejections); of the valid ones fx B / z within 1 px of d_true 98.3/97.4/96.9 %,
# z within 5 % of the true depth 98.0/96.9/96.6 %. Bounds: measured less 2 points.
if "$PYTHON" - "$T" >"$T/py.out" 2>&1 <<'PY'; then
import json, sys
t = sys.argv[1]
sys.path.insert(0, t)
from maps import npy, pfm
cal = json.load(open(t + '/st/stereo_calib.json'))
fb = cal['left']['fx'] * cal['baseline']
for k in range(3):
    w, h, z = npy('%s/r/stereo/%06d/depth.npy' % (t, k))
    _, _, ed = npy('%s/r/stereo/%06d/disparity.npy' % (t, k))
    _, _, d = pfm('%s/sc/truth/disparity/%06d.pfm' % (t, k))
    n = valid = good = close = 0
    for y in range(h):
        for x in range(w):
            if not (d[y][x] > 0):
                continue
            n += 1
            if z[y][x] == z[y][x]:
                valid += 1
                good += abs(fb / z[y][x] - d[y][x]) <= 1.0
                close += abs(z[y][x] - fb / d[y][x]) <= 0.05 * fb / d[y][x]
    print('frame %d: valid %.1f %%; of those: disparity within 1 px %.1f %%, depth within 5 %% '
          '%.1f %%' % (k, 100 * valid / n, 100 * good / valid, 100 * close / valid))
    assert valid >= 0.85 * n and good >= 0.95 * valid and close >= 0.94 * valid, (k, n, valid, good)
    rec = json.load(open('%s/r/stereo/%06d/done.json' % (t, k)))
    names = [o['name'] for o in rec['outputs']]
    assert names == ['depth.npy', 'disparity.npy', 'mask.png'] and len(rec['key']) == 64, rec
    # the disparity map has a value everywhere (filled), within 1 px of d_true mostly
    bad = sum(abs(ed[y][x] - d[y][x]) > 1 for y in range(h) for x in range(w) if d[y][x] > 0)
    assert bad <= 0.1 * n, (k, bad, n)
for name in ('000000-000001', '000001-000002'):
    st = json.load(open('%s/r/pairs/%s/stats.json' % (t, name)))
    assert st['matches']['lifted'] is True, st['matches']
PY
    pass "stereo depth against the exact disparity; matches lifted"
else fail "stereo depth against the exact disparity; matches lifted" "$(cat "$T/py.out" | tail -c 400)"; fi

if "$B" run "$T/st" -o "$T/r" $OPT --resume >"$T/out" 2>"$T/err" &&
    grep -q "stereo: 0 depth maps computed, 3 reused" "$T/out" &&
    grep -q "2 pairs: 0 computed, 2 skipped" "$T/out"; then
    pass "--resume reuses the cached depth and skips the pairs"
else fail "--resume reuses the cached depth and skips the pairs" "$(cat "$T/out" "$T/err" | head -c 400)"; fi

# another right frame 2: its depth and the one pair using it are redone
cp "$T/st/right/000001.png" "$T/st/right/000002.png"
if "$B" run "$T/st" -o "$T/r" $OPT --resume >"$T/out" 2>"$T/err" &&
    grep -q "stereo: 1 depth maps computed, 2 reused" "$T/out" &&
    grep -q "2 pairs: 1 computed, 1 skipped" "$T/out"; then
    pass "a changed right frame redoes its depth and its pair only"
else fail "a changed right frame redoes its depth and its pair only" "$(cat "$T/out" "$T/err" | head -c 400)"; fi

# two shards, then the merge: every pair done (the merge hashes the cached depth maps)
if "$B" run "$T/st" -o "$T/sh" $OPT --shard 0/2 >"$T/out" 2>"$T/err" &&
    "$B" run "$T/st" -o "$T/sh" $OPT --shard 1/2 >>"$T/out" 2>>"$T/err" &&
    "$B" run "$T/st" -o "$T/sh" $OPT --merge >"$T/out2" 2>>"$T/err" &&
    grep -q "2 pairs: 2 done, 0 failed, 0 pending" "$T/out2"; then
    pass "stereo run in two shards merges with every pair done"
else fail "stereo run in two shards merges with every pair done" "$(cat "$T/out" "$T/out2" "$T/err" | head -c 400)"; fi

rm "$T/st/right/000001.png"
expect_error "a missing right frame is named" - "right: no right frame for .*left/000001.png" \
    "$B" run "$T/st" -o "$T/r2" $OPT
mkdir -p "$T/st2/left" "$T/st2/right"
cp "$T"/sc/color/*.png "$T/st2/left/"
cp "$T"/sc/right/*.png "$T/st2/right/"
expect_error "--stereo without a calibration names the file" - "st2/stereo_calib.json" \
    "$B" run "$T/st2" -o "$T/r3" $OPT --stereo

# a stereo sequence (issue 20): synth --stereo names each frame's right frame and
# stereo_calib in sequence.json; --stereo (its frames also have depth) takes the depth
# from the stereo engine, byte for byte the stereo folder's (same frames, same options)
if "$B" run "$T/sc" -o "$T/sq" $OPT --stereo >"$T/out" 2>"$T/err" &&
    grep -q "stereo: 3 depth maps computed, 0 reused" "$T/out" &&
    cmp -s "$T/sq/stereo/000000/depth.npy" "$T/r/stereo/000000/depth.npy" &&
    cmp -s "$T/sq/stereo/000001/depth.npy" "$T/r/stereo/000001/depth.npy"; then
    pass "stereo sequence (--stereo): the stereo folder's depth maps"
else fail "stereo sequence (--stereo): the stereo folder's depth maps" "$(cat "$T/out" "$T/err" | head -c 400)"; fi
# a sequence whose frames have right frames but no depth is a stereo one without --stereo;
# without right frames --stereo is refused in one line
"$PYTHON" - "$T/sc/sequence.json" "$T/sc/nodepth.json" "$T/sc/noright.json" <<'PY'
import json, sys
s = json.load(open(sys.argv[1]))
a = json.loads(json.dumps(s)); b = json.loads(json.dumps(s))
for f in a['frames']:
    f.pop('depth')
for f in b['frames']:
    f.pop('right')
json.dump(a, open(sys.argv[2], 'w')); json.dump(b, open(sys.argv[3], 'w'))
PY
if "$B" run "$T/sc/nodepth.json" -o "$T/sq2" $OPT >"$T/out" 2>"$T/err" &&
    grep -q "stereo: 3 depth maps computed" "$T/out" &&
    cmp -s "$T/sq2/stereo/000000/depth.npy" "$T/sq/stereo/000000/depth.npy" &&
    grep -q '"lifted":true' "$T/sq2/pairs/000000-000001/stats.json"; then
    pass "a sequence with right frames and no depth is a stereo sequence"
else fail "a sequence with right frames and no depth is a stereo sequence" "$(cat "$T/out" "$T/err" | head -c 400)"; fi
expect_error "--stereo on a sequence without right frames" - 'noright.json: --stereo: no frame has a "right" frame' \
    "$B" run "$T/sc/noright.json" -o "$T/sq3" $OPT --stereo
