#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew match` and `sinew lift`: a synthetic plane with known motion
# (exact answers), intrinsics rescaling, depth conventions, sampling, labels, outputs
# loaded by numpy, one-line errors, and 7-Scenes (Shotton et al., CVPR 2013) when the
# data folder is present.
. tests/cli/lib.sh

# ---- synthetic scene (invented data): 64x48, fx = fy = 60, cx = 31.5, cy = 23.5; a
# fronto-parallel plane at 1.5 m moves by t = (0.01, 0.005, 0.02) m, so depth 1 is 1.52 m
# and the flow is the exact projection of X0 + t. Small PNG writer inline (zlib only).
cat >"$T/png.py" <<'EOF'
import struct, zlib
import numpy as np
def write_png(path, a):
    a = np.asarray(a); h, w = a.shape
    bd = 16 if a.dtype == np.uint16 else 8
    rows = b''.join(b'\0' + a[y].astype('>u2' if bd == 16 else 'u1').tobytes() for y in range(h))
    def chunk(t, d):
        return struct.pack('>I', len(d)) + t + d + struct.pack('>I', zlib.crc32(t + d) & 0xffffffff)
    with open(path, 'wb') as f:
        f.write(b'\x89PNG\r\n\x1a\n' + chunk(b'IHDR', struct.pack('>IIBBBBB', w, h, bd, 0, 0, 0, 0))
                + chunk(b'IDAT', zlib.compress(rows)) + chunk(b'IEND', b''))
EOF
if ! "$PYTHON" - "$T" <<'EOF'
import sys, os, json
import numpy as np
sys.path.insert(0, sys.argv[1]); from png import write_png
d = sys.argv[1]; W, H, f, cx, cy = 64, 48, 60.0, 31.5, 23.5
t = np.array([0.01, 0.005, 0.02])
u, v = np.meshgrid(np.arange(W, dtype=float), np.arange(H, dtype=float))
Z0 = np.full((H, W), 1.5)
X0 = np.stack([(u - cx) * Z0 / f, (v - cy) * Z0 / f, Z0], -1)
X1 = X0 + t
u1 = f * X1[..., 0] / X1[..., 2] + cx; v1 = f * X1[..., 1] / X1[..., 2] + cy
flow = np.stack([u1 - u, v1 - v], -1).astype(np.float32)
np.save(d + '/flow.npy', flow)
write_png(d + '/d0.png', np.full((H, W), 1500, np.uint16))
write_png(d + '/d1.png', np.full((H, W), 1520, np.uint16))
write_png(d + '/d8.png', np.full((H, W), 150, np.uint8))
np.save(d + '/d0.npy', Z0.astype(np.float32)); np.save(d + '/d1.npy', np.full((H, W), 1.52, np.float32))
write_png(d + '/dsmall.png', np.full((H - 1, W), 1500, np.uint16))
os.mkdir(d + '/chk')
mask = np.zeros((H, W), np.uint8); mask[10, 10] = 1; mask[20, 30] = 4 | 1
write_png(d + '/chk/mask.png', mask)
conf = ((u + v) % 5 / 5 + 0.1).astype(np.float32); np.save(d + '/chk/confidence.npy', conf)
os.mkdir(d + '/badchk'); write_png(d + '/badchk/mask.png', mask)
c2 = conf.copy(); c2[3, 3] = np.nan; np.save(d + '/badchk/confidence.npy', c2)
lab = np.where(u < 32, 5, 9).astype(np.uint8)
write_png(d + '/l0.png', lab); write_png(d + '/l1.png', lab)
json.dump({"fx": 120, "fy": 120, "cx": 63.5, "cy": 47.5, "width": 128, "height": 96},
          open(d + '/k2x.json', 'w'))
json.dump({"fx": 0, "fy": 60, "cx": 31.5, "cy": 23.5}, open(d + '/kbad.json', 'w'))
open(d + '/k.txt', 'w').write('60 0 31.5\n0 60 23.5\n0 0 1\n')
EOF
then
    fail "lift fixtures" "python could not build the synthetic scene"
    exit 0
fi
K=60,60,31.5,23.5

expect_ok "lift synthetic plane" "$SINEW_BIN" lift --flow "$T/flow.npy" --check "$T/chk" \
    --depth0 "$T/d0.png" --depth1 "$T/d1.png" --intrinsics "$K" -o "$T/m.npy" \
    --ply "$T/m.ply" --csv "$T/m.csv" --normals
if [ -s "$T/err" ]; then fail "lift quiet on success" "$(head -c 300 "$T/err")"; else pass "lift quiet on success"; fi
# Exact answers: X0 from the pinhole formula, X1 - X0 = t, masked pixels absent, weight =
# confidence, normals (0, 0, -1), sidecar columns name the array's columns.
if "$PYTHON" - "$T" >"$T/py" 2>&1 <<'EOF'
import sys, json
import numpy as np
d = sys.argv[1]
M = np.load(d + '/m.npy'); meta = json.load(open(d + '/m.json'))
c = {n: i for i, n in enumerate(meta['columns'])}
assert M.shape == (meta['rows'], len(c)) and M.dtype == np.float32
assert list(c)[:11] == 'u0 v0 u1 v1 weight X0 Y0 Z0 X1 Y1 Z1'.split(), list(c)
u, v = M[:, c['u0']], M[:, c['v0']]
assert np.allclose(M[:, c['X0']], (u - 31.5) * 1.5 / 60, atol=1e-6)
assert np.allclose(M[:, c['Y0']], (v - 23.5) * 1.5 / 60, atol=1e-6)
assert np.allclose(M[:, c['Z0']], 1.5)
for k, tk in zip(('X', 'Y', 'Z'), (0.01, 0.005, 0.02)):
    assert np.allclose(M[:, c[k + '1']] - M[:, c[k + '0']], tk, atol=2e-6), k
assert not np.any((u == 10) & (v == 10)) and not np.any((u == 30) & (v == 20))
conf = np.load(d + '/chk/confidence.npy')
assert np.array_equal(M[:, c['weight']], conf[v.astype(int), u.astype(int)])
assert np.allclose(M[:, c['nz0']], -1, atol=1e-5)
assert meta['counts']['masked'] == 2 and meta['counts']['kept'] == len(M)
assert meta['mask_bits']['occluded'] + meta['mask_bits']['fb_mismatch'] == 2 and meta['mask_bits']['motion_boundary'] == 1
assert meta['depth']['scale'] == 1000 and meta['depth']['kind'] == 'z'
assert meta['intrinsics']['fx'] == 60 and meta['inputs']['depth0'].endswith('d0.png')
assert abs(meta['depth']['median_valid_m'][1] - 1.52) < 1e-6
C = np.genfromtxt(d + '/m.csv', delimiter=',', names=True)
assert C.dtype.names == tuple(meta['columns']) and len(C) == len(M)
print(len(M))
EOF
then pass "lift exact plane, sidecar, csv ($(cat "$T/py") rows)"; else fail "lift exact plane" "$(tail -3 "$T/py")"; fi
head -c 200 "$T/m.ply" | grep -q "format binary_little_endian 1.0" && pass "lift ply header" \
    || fail "lift ply header" "not a binary PLY"

# Same answer with intrinsics calibrated at twice the size (rescaled), from a 3x3 text file,
# and with float depth in metres.
expect_ok "lift rescaled intrinsics" "$SINEW_BIN" lift --flow "$T/flow.npy" --check "$T/chk" \
    --depth0 "$T/d0.png" --depth1 "$T/d1.png" --intrinsics "$T/k2x.json" -o "$T/m2.npy" --normals
expect_ok "lift matrix intrinsics, float depth" "$SINEW_BIN" lift --flow "$T/flow.npy" \
    --check "$T/chk" --depth0 "$T/d0.npy" --depth1 "$T/d1.npy" --intrinsics "$T/k.txt" \
    -o "$T/m3.npy" --normals
if "$PYTHON" -c "
import numpy as np, sys, json
a, b, c = (np.load(sys.argv[1] + n) for n in ('/m.npy', '/m2.npy', '/m3.npy'))
assert a.shape == b.shape == c.shape
assert np.allclose(a, b, atol=1e-6) and np.allclose(a, c, atol=1e-6)
k = json.load(open(sys.argv[1] + '/m2.json'))['intrinsics']
assert k['fx'] == 60 and k['cx'] == 31.5 and k['rescaled_from']['width'] == 128
" "$T" 2>"$T/py"; then pass "lift conventions agree"; else fail "lift conventions agree" "$(tail -2 "$T/py")"; fi

# A wrong depth scale still runs but warns, naming the file.
"$SINEW_BIN" lift --flow "$T/flow.npy" --depth0 "$T/d0.png" --depth1 "$T/d1.png" \
    --intrinsics "$K" --depth-scale 1 -o "$T/mw.npy" >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && grep -q "warning: .*d0.png: median valid depth 1500 m" "$T/err"; then
    pass "lift warns about depth scale"; else fail "lift warns about depth scale" "$(cat "$T/err")"; fi

# sinew match: 2-D, top-K, labels.
expect_ok "match top-k" "$SINEW_BIN" match --flow "$T/flow.npy" --check "$T/chk" --top-k 100 \
    --cell 8 -o "$T/t.npy" --labels0 "$T/l0.png" --labels1 "$T/l1.png" --csv "$T/t.csv"
if "$PYTHON" -c "
import numpy as np, sys, json
M = np.load(sys.argv[1] + '/t.npy'); meta = json.load(open(sys.argv[1] + '/t.json'))
assert meta['columns'] == 'u0 v0 u1 v1 weight label0 label1'.split(), meta['columns']
assert M.shape == (100, 7)
cells = set(zip((M[:, 0] // 8).astype(int), (M[:, 1] // 8).astype(int)))
assert len(cells) >= 40, len(cells)
assert meta['params']['sampling'] == 'top_k' and meta['counts']['not_sampled'] > 0
assert sum(meta['labels']['kept_per_label0'].values()) == 100
" "$T" 2>"$T/py"; then pass "match top-k spread and labels"; else fail "match top-k spread and labels" "$(tail -2 "$T/py")"; fi
expect_ok "match stride without check" "$SINEW_BIN" match --flow "$T/flow.npy" --stride 8 -o "$T/s.npy"

# Errors: one line naming the file, no output left behind.
expect_error "lift missing flow" "$T/e1.npy" "nope.npy" "$SINEW_BIN" lift --flow "$T/nope.npy" \
    --depth0 "$T/d0.png" --depth1 "$T/d1.png" --intrinsics "$K" -o "$T/e1.npy"
expect_error "lift hostile intrinsics" "$T/e2.npy" "kbad.json.*fx" "$SINEW_BIN" lift \
    --flow "$T/flow.npy" --depth0 "$T/d0.png" --depth1 "$T/d1.png" --intrinsics "$T/kbad.json" \
    -o "$T/e2.npy"
# A focal length of 1e-300 px once gave inf in X/Y with exit 0 (issue 21, item 6).
expect_error "lift tiny focal length" "$T/e10.npy" "intrinsics.*fx must be >= 0.1" "$SINEW_BIN" \
    lift --flow "$T/flow.npy" --depth0 "$T/d0.png" --depth1 "$T/d1.png" \
    --intrinsics 1e-300,1e-300,31.5,23.5 -o "$T/e10.npy"
# An absurd depth scale puts depth beyond float range: those points are rejected, and
# every value in the table stays finite (docs/formats.md promises it).
"$SINEW_BIN" lift --flow "$T/flow.npy" --depth0 "$T/d0.png" --depth1 "$T/d1.png" \
    --intrinsics 0.1,0.1,31.5,23.5 --depth-scale 1e-34 -o "$T/huge.npy" >"$T/out" 2>"$T/err"
if "$PYTHON" -c "
import numpy as np, sys
M = np.load(sys.argv[1] + '/huge.npy')
assert np.isfinite(M).all(), 'non-finite values'
" "$T" 2>"$T/py"; then pass "lift table finite under absurd scales"; else fail "lift table finite under absurd scales" "$(tail -2 "$T/py") $(cat "$T/err")"; fi
expect_error "lift depth size" "$T/e3.npy" "dsmall.png" "$SINEW_BIN" lift --flow "$T/flow.npy" \
    --depth0 "$T/d0.png" --depth1 "$T/dsmall.png" --intrinsics "$K" -o "$T/e3.npy"
expect_error "lift 8-bit depth" "$T/e4.npy" "d8.png.*8-bit" "$SINEW_BIN" lift --flow "$T/flow.npy" \
    --depth0 "$T/d8.png" --depth1 "$T/d1.png" --intrinsics "$K" -o "$T/e4.npy"
expect_error "lift NaN confidence" "$T/e5.npy" "confidence.npy" "$SINEW_BIN" lift \
    --flow "$T/flow.npy" --check "$T/badchk" --depth0 "$T/d0.png" --depth1 "$T/d1.png" \
    --intrinsics "$K" -o "$T/e5.npy"
expect_error "lift unwritable output" "$T/no/e6.npy" "no/e6" "$SINEW_BIN" lift \
    --flow "$T/flow.npy" --depth0 "$T/d0.png" --depth1 "$T/d1.png" --intrinsics "$K" \
    -o "$T/no/e6.npy"
expect_error "lift missing depth1" "$T/e7.npy" "required" "$SINEW_BIN" lift --flow "$T/flow.npy" \
    --depth0 "$T/d0.png" --intrinsics "$K" -o "$T/e7.npy"
[ "$(sh -c "'$SINEW_BIN' lift --flow x -o y >/dev/null 2>&1; echo \$?")" = 2 ] \
    && pass "lift usage exit 2" || fail "lift usage exit 2" "wrong exit code"
expect_error "match stride and top-k" "$T/e8.npy" "exclude" "$SINEW_BIN" match \
    --flow "$T/flow.npy" --stride 2 --top-k 5 -o "$T/e8.npy"
expect_error "match bad intrinsics option" "$T/e9.npy" "lift" "$SINEW_BIN" match \
    --flow "$T/flow.npy" --intrinsics "$K" -o "$T/e9.npy"
for c in lift match; do
    if "$SINEW_BIN" $c --help >"$T/h" 2>&1 && grep -q "not a medical device" "$T/h"; then
        pass "$c --help notice"; else fail "$c --help notice" "missing"; fi
done

# ---- 7-Scenes (Shotton et al., CVPR 2013): static scene, camera-to-world
# poses, fx = fy = 585, cx = 320, cy = 240, depth mm. The flow is computed in numpy from
# the ground-truth relative pose (frame-0 points projected into frame 1); the depth is read
# by sinew itself (a zero-flow lift of frame 0 lists every usable X0). Checks: X0 against
# the pinhole formula, median |T X0 - X1| <= 1 cm, and a numpy Kabsch fit of the lifted
# matches recovers T within 1 cm and 0.3 degrees.
S="$SINEW_DATA/7scenes/tsdf-fusion-frames-150-154"
if ! have_data 7scenes/tsdf-fusion-frames-150-154; then
    skip "lift 7-Scenes" "no data folder ($SINEW_DATA)"
    exit 0
fi
"$PYTHON" -c "import numpy as np; np.save('$T/zero.npy', np.zeros((480, 640, 2), np.float32))"
for i in 0 1 2 3; do
    a=$(printf "%06d" $((150 + i))); b=$(printf "%06d" $((151 + i)))
    n="lift 7-Scenes $a->$b"
    if ! "$SINEW_BIN" lift --flow "$T/zero.npy" --depth0 "$S/frame-$a.depth.png" \
        --depth1 "$S/frame-$a.depth.png" --intrinsics "$S/camera-intrinsics.txt" \
        -o "$T/x0.npy" >/dev/null 2>"$T/err"; then fail "$n" "zero-flow lift: $(cat "$T/err")"; continue; fi
    "$PYTHON" - "$T" "$S" "$a" "$b" >"$T/py" 2>&1 <<'EOF'
import sys
import numpy as np
T, S, a, b = sys.argv[1:5]
P0 = np.loadtxt(f'{S}/frame-{a}.pose.txt'); P1 = np.loadtxt(f'{S}/frame-{b}.pose.txt')
Rel = np.linalg.inv(P1) @ P0
M = np.load(T + '/x0.npy')
u, v, X = M[:, 0].astype(int), M[:, 1].astype(int), M[:, 5:8].astype(float)
assert np.allclose(X[:, 0], (u - 320) * X[:, 2] / 585, atol=1e-5)
Y = X @ Rel[:3, :3].T + Rel[:3, 3]
flow = np.full((480, 640, 2), np.nan, np.float32)
flow[v, u, 0] = 585 * Y[:, 0] / Y[:, 2] + 320 - u
flow[v, u, 1] = 585 * Y[:, 1] / Y[:, 2] + 240 - v
np.save(T + '/pose_flow.npy', flow)
EOF
    if [ $? -ne 0 ]; then fail "$n" "numpy flow: $(tail -2 "$T/py")"; continue; fi
    if ! "$SINEW_BIN" lift --flow "$T/pose_flow.npy" --depth0 "$S/frame-$a.depth.png" \
        --depth1 "$S/frame-$b.depth.png" --intrinsics "$S/camera-intrinsics.txt" \
        --depth-scale 1000 -o "$T/m7.npy" --ply "$T/m7.ply" >/dev/null 2>"$T/err"; then
        fail "$n" "lift: $(cat "$T/err")"; continue; fi
    "$PYTHON" - "$T" "$S" "$a" "$b" >"$T/py" 2>&1 <<'EOF'
import sys
import numpy as np
T, S, a, b = sys.argv[1:5]
P0 = np.loadtxt(f'{S}/frame-{a}.pose.txt'); P1 = np.loadtxt(f'{S}/frame-{b}.pose.txt')
Rel = np.linalg.inv(P1) @ P0
M = np.load(T + '/m7.npy').astype(float)
X0, X1, w = M[:, 5:8], M[:, 8:11], M[:, 4]
res = np.linalg.norm(X0 @ Rel[:3, :3].T + Rel[:3, 3] - X1, axis=1)
med = np.median(res)
# Weighted Kabsch (Kabsch 1976; Umeyama 1991) in numpy, independent of sinew's.
c0 = (w[:, None] * X0).sum(0) / w.sum(); c1 = (w[:, None] * X1).sum(0) / w.sum()
Hm = ((X0 - c0) * w[:, None]).T @ (X1 - c1)
U, s, Vt = np.linalg.svd(Hm)
D = np.diag([1, 1, np.sign(np.linalg.det(Vt.T @ U.T))])
R = Vt.T @ D @ U.T; t = c1 - R @ c0
dt = np.linalg.norm(t - Rel[:3, 3])
E = R @ Rel[:3, :3].T
ang = np.degrees(np.arctan2(np.linalg.norm([E[2, 1] - E[1, 2], E[0, 2] - E[2, 0], E[1, 0] - E[0, 1]]) / 2,
                            (np.trace(E) - 1) / 2))
print(f'{len(M)} matches, median {med * 1e3:.2f} mm, fit {dt * 1e3:.2f} mm {ang:.3f} deg')
sys.exit(0 if med <= 0.01 and dt <= 0.01 and ang <= 0.3 else 1)
EOF
    if [ $? -eq 0 ]; then pass "$n: $(cat "$T/py")"; else fail "$n" "$(tail -2 "$T/py")"; fi
done
