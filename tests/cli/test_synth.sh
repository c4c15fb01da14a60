# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew synth`: the written sequence is complete and described by
# sequence.json; an independent numpy check (Debian python3-numpy, own PNG decoder on
# Python's zlib) confirms that depth PNG + intrinsics + scene flow reproject onto
# p + flow; output is byte-identical across thread counts; bad arguments give one
# stderr line and no output. Run from the repository root (tests/run does).
. "$(dirname "$0")/lib.sh"

if "$SINEW_BIN" synth --help >"$T/h" 2>&1 && grep -q 'sinew synth' "$T/h" &&
    grep -q 'examples' "$T/h" && tail -n 3 "$T/h" | grep -q 'research tool'; then
    pass "synth --help has examples and ends with the notice"
else fail "synth --help" "$(head -c 300 "$T/h")"; fi

expect_ok "synth small sequence" "$SINEW_BIN" synth -o "$T/a" --frames 3 --size 64x48 --seed 5
n=$(find "$T/a" -type f | wc -l)
# 3 x (color, depth, labels) + 2 x (2 flo, 2 occlusion, 1 npy) + sequence.json = 20
if [ "$n" -eq 20 ]; then pass "synth writes 20 files"; else fail "synth file count" "$n files"; fi
if ls -R "$T/a" | grep -q '\.tmp-'; then fail "synth temporaries" "left behind"; else pass "synth leaves no temporaries"; fi

cat >"$T/check.py" <<'EOF'
import json, sys
import numpy as np
sys.path.insert(0, 'demo')
from truth import read_png, read_flo  # the demo's numpy readers (own PNG decoder)

root = sys.argv[1]
seq = json.load(open(root + '/sequence.json'))
k = seq['intrinsics']
fx, fy, cx, cy = k['fx'], k['fy'], k['cx'], k['cy']
assert seq['version'] == 1 and len(seq['frames']) == 3 and len(seq['pairs']) == 2
assert seq['label_names'] == ['background', 'tray', 'pad', 'block', 'probe']
worst = 0.0
for p in seq['pairs']:
    z = read_png(root + '/' + seq['frames'][p['from']]['depth'])[:, :, 0] / seq['depth_scale']
    flow = read_flo(root + '/' + p['flow_forward'])
    sf = np.load(root + '/' + p['scene_flow']).astype(np.float64)
    occ = read_png(root + '/' + p['occlusion_forward'])[:, :, 0]
    labels = read_png(root + '/' + seq['frames'][p['from']]['labels'])[:, :, 0]
    h, w = z.shape
    assert flow.shape == (h, w, 2) and sf.shape == (h, w, 3) and (w, h) == (k['width'], k['height'])
    assert set(np.unique(occ)) <= {0.0, 255.0} and labels.max() <= 4
    ys, xs = np.mgrid[0:h, 0:w].astype(np.float64)
    X = np.stack([z * (xs - cx) / fx, z * (ys - cy) / fy, z], -1) + sf
    qx = fx * X[..., 0] / X[..., 2] + cx
    qy = fy * X[..., 1] / X[..., 2] + cy
    ok = z > 0
    err = np.hypot(qx - xs - flow[..., 0], qy - ys - flow[..., 1])[ok]
    worst = max(worst, float(err.max()))
# depth is rounded to 1 mm (~0.2% at 0.4 m): the reprojection moves by at most a few
# hundredths of a pixel for these small motions
print('max reprojection error %.4f px' % worst)
sys.exit(0 if worst < 0.05 else 1)
EOF
if "$PYTHON" "$T/check.py" "$T/a" >"$T/py.out" 2>&1; then
    pass "numpy: depth + intrinsics + scene flow reproject onto the flow ($(cat "$T/py.out"))"
else fail "numpy reprojection check" "$(tail -c 400 "$T/py.out")"; fi

expect_ok "synth again with 1 thread" "$SINEW_BIN" synth -o "$T/b" --frames 3 --size 64x48 --seed 5 --threads 1
if diff -r "$T/a" "$T/b" >/dev/null; then pass "synth output is byte-identical across thread counts"
else fail "synth determinism" "$(diff -rq "$T/a" "$T/b" | head -3)"; fi

expect_ok "synth other seed" "$SINEW_BIN" synth -o "$T/c" --frames 2 --size 64x48 --seed 6
if cmp -s "$T/a/color/000000.png" "$T/c/color/000000.png"; then fail "seed" "colour unchanged by --seed"
else pass "another seed changes the colour images"; fi

expect_ok "synth --noise" "$SINEW_BIN" synth -o "$T/d" --frames 2 --size 64x48 --seed 5 --noise
if cmp -s "$T/a/color/000000.png" "$T/d/color/000000.png" && ! cmp -s "$T/a/depth/000000.png" "$T/d/depth/000000.png"; then
    pass "--noise changes depth only"
else fail "--noise" "colour changed or depth unchanged"; fi

expect_error "synth without -o" - 'missing -o' "$SINEW_BIN" synth
expect_error "synth --frames 1" - "--frames: '1'" "$SINEW_BIN" synth -o "$T/e" --frames 1
expect_error "synth --size 4x4" - "--size: '4x4'" "$SINEW_BIN" synth -o "$T/e" --size 4x4
expect_error "synth --size junk" - "--size: 'big'" "$SINEW_BIN" synth -o "$T/e" --size big
expect_error "synth --seed -1" - "--seed: '-1'" "$SINEW_BIN" synth -o "$T/e" --seed -1
expect_error "synth huge size" "$T/big" "image size: 100000x100000 exceeds" \
    "$SINEW_BIN" synth -o "$T/big" --size 100000x100000
expect_error "synth unknown option" - "unknown option '--colour'" "$SINEW_BIN" synth -o "$T/e" --colour
expect_error "synth extra argument" - "unexpected argument 'x'" "$SINEW_BIN" synth -o "$T/e" x
expect_error "synth missing parent" "$T/nope/out" "nope/out: cannot create folder" \
    "$SINEW_BIN" synth -o "$T/nope/out" --frames 2 --size 16x16
: >"$T/file"
expect_error "synth output is a file" - "file: cannot create folder" \
    "$SINEW_BIN" synth -o "$T/file" --frames 2 --size 16x16

# --swing: the probe's own image motion where it crosses the pad centre is the requested
# speed (v = px * z / fx at the crossing point); the rod's upper part is nearer the camera,
# so its pixels move a little faster: mean over its pixels in [1.0, 1.2] x the speed
expect_ok "synth --swing 100" "$SINEW_BIN" synth -o "$T/s" --frames 2 --size 320x240 --swing 100
cat >"$T/swing.py" <<'EOF2'
import sys
import numpy as np
sys.path.insert(0, 'demo')
from truth import read_png, read_flo
root, speed = sys.argv[1], float(sys.argv[2])
f = read_flo(root + '/truth/flow_forward/000000.flo')
lab = read_png(root + '/labels/000000.png')[:, :, 0]
m = lab == 4
probe = float(np.hypot(f[..., 0], f[..., 1])[m].mean())
rest = float(np.nanmedian(np.hypot(f[..., 0], f[..., 1])[(lab == 2) | (lab == 1)]))
print('probe %d px, mean |flow| %.1f px; tray and pad median %.1f px' % (m.sum(), probe, rest))
sys.exit(0 if m.sum() > 100 and speed <= probe <= 1.2 * speed and rest < 10 else 1)
EOF2
if "$PYTHON" "$T/swing.py" "$T/s" 100 >"$T/sw.out" 2>&1; then
    pass "--swing 100 moves the probe ~100 px/frame, the rest slowly ($(cat "$T/sw.out"))"
else fail "--swing speed" "$(tail -c 400 "$T/sw.out")"; fi
expect_error "synth --swing 0" - "--swing: '0'" "$SINEW_BIN" synth -o "$T/e" --swing 0
expect_error "synth --swing 2000" - "--swing: '2000'" "$SINEW_BIN" synth -o "$T/e" --swing 2000
