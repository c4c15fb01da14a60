# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew stereo`: a synthetic pair shifted by a known disparity (made
# and read back with the Python standard library, so the checks do not rely on sinew's own
# readers), the check folder, depth from a calibration against the formula worked by hand,
# one-line errors with no partial output, and the same bytes for 1 and 2 threads.
. tests/cli/lib.sh

if "$SINEW_BIN" stereo --help | tail -n 3 | grep -q "not a medical device"; then
    pass "stereo --help ends with the notice"
else fail "stereo --help ends with the notice" "notice missing"; fi

# Left: smooth random texture 160x60; right(x) = left(x + 5): disparity 5 everywhere
# (left x < 5 leaves the right frame). Wider right frame for the size error.
"$PYTHON" - "$T" <<'EOF'
import random, sys
t = sys.argv[1]
random.seed(7)
W, H, D = 160, 60, 5
tex = [[random.randrange(256) for _ in range(W + D)] for _ in range(H)]
def pgm(path, rows, w):
    with open(path, 'wb') as f:
        f.write(b'P5\n%d %d\n255\n' % (w, len(rows)))
        for r in rows:
            f.write(bytes(r[:w]))
pgm(t + '/l.pgm', [r[:W] for r in tex], W)
pgm(t + '/wide.pgm', tex, W + D)
EOF
# right(x) = left(x + 5) (the last column repeats where x + 5 leaves the left frame)
"$PYTHON" - "$T" <<'EOF'
import sys
t = sys.argv[1]
b = open(t + '/l.pgm', 'rb').read()
hdr = b'P5\n160 60\n255\n'
px = b[len(hdr):]
W, H, D = 160, 60, 5
out = bytearray()
for y in range(H):
    row = px[y * W:(y + 1) * W]
    out += bytes(row[min(x + D, W - 1)] for x in range(W))
open(t + '/r.pgm', 'wb').write(hdr + bytes(out))
EOF

# the float map readers (standard library only)
cp "$(dirname "$0")/maps.py" "$T/read.py"

if "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/d.pfm" --right "$T/rd.npy" \
    --check "$T/chk" --disparities 16 >"$T/out" 2>"$T/err"; then
    pass "stereo runs on a synthetic pair"
else fail "stereo runs on a synthetic pair" "$(head -c 300 "$T/err")"; fi

# interior pixels (x >= 12, away from the census window at the border) get 5 +- 0.2
if "$PYTHON" - "$T" <<'EOF'
import sys; sys.path.insert(0, sys.argv[1]); from read import pfm, npy
w, h, d = pfm(sys.argv[1] + '/d.pfm')
vals = [d[y][x] for y in range(h) for x in range(12, w)]
good = sum(abs(v - 5) <= 0.2 for v in vals)
assert good >= 0.99 * len(vals), (good, len(vals))
assert all(v == v for row in d for v in row)  # filled: no NaN in the left map
w, h, r = npy(sys.argv[1] + '/rd.npy')
inner = [r[y][x] for y in range(h) for x in range(8, w - 12)]
assert sum(abs(v - 5) <= 0.2 for v in inner) >= 0.99 * len(inner)
EOF
then pass "disparity 5 recovered (left .pfm, right .npy)"
else fail "disparity 5 recovered (left .pfm, right .npy)" "values off"; fi

ok=1
for f in mask.png confidence.npy disparity.png reasons.png stereo.json; do
    [ -s "$T/chk/$f" ] || { ok=0; fail "check folder" "$f missing"; }
done
[ $ok = 1 ] && pass "check folder has mask, confidence, pictures, stereo.json"
if "$PYTHON" -c "import json,sys; j=json.load(open(sys.argv[1])); assert j['pixels']==9600 and j['kept']+j['filled']==9600 and j['reasons']['outside']+j['reasons']['occluded']>=4*60" "$T/chk/stereo.json"; then
    pass "stereo.json counts"
else fail "stereo.json counts" "$(cat "$T/chk/stereo.json")"; fi

# depth: Z = fx B / (d + doffs) (Middlebury 2014 convention, doffs = cx_right - cx_left),
# by hand: 500 px * 0.2 m / (5 + 5) px = 10 m.
cat >"$T/cal.json" <<'EOF'
{"left": {"fx": 500, "fy": 500, "cx": 80, "cy": 30},
 "right": {"fx": 500, "fy": 500, "cx": 85, "cy": 30}, "baseline": 0.2}
EOF
if "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/d2.png" --disparities 16 --calib "$T/cal.json" \
    --depth "$T/z.npy" >"$T/out" 2>"$T/err" && "$PYTHON" - "$T" <<'EOF'
import sys; sys.path.insert(0, sys.argv[1]); from read import npy
w, h, z = npy(sys.argv[1] + '/z.npy')
inner = [z[y][x] for y in range(h) for x in range(12, w)]
assert sum(abs(v - 10) <= 0.2 for v in inner) >= 0.99 * len(inner), inner[:5]
assert all(z[y][x] != z[y][x] for y in range(h) for x in range(3))  # rejected: NaN
EOF
then pass "depth from the calibration (10 m by hand)"
else fail "depth from the calibration (10 m by hand)" "$(head -c 300 "$T/err")"; fi

expect_ok "one thread" "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/t1.pfm" --disparities 16 --threads 1
expect_ok "two threads" "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/t2.pfm" --disparities 16 --threads 2
if cmp -s "$T/t1.pfm" "$T/t2.pfm"; then pass "same bytes for 1 and 2 threads"
else fail "same bytes for 1 and 2 threads" "outputs differ"; fi

# errors: one line, exit non-zero, no output left behind
expect_error "frames of different sizes" "$T/e1.pfm" "wide.pgm: 165x60" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/wide.pgm" -o "$T/e1.pfm"
expect_error "missing frame" "$T/e2.pfm" "nope.png" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/nope.png" -o "$T/e2.pfm"
printf '{"left": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "right": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "baseline": 120}' >"$T/bad.json"
expect_error "impossible baseline" "$T/e3.pfm" "bad.json: impossible baseline" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e3.pfm" --calib "$T/bad.json" --depth "$T/e3.npy"
printf '{"left": {"fx": 0, "fy": 500, "cx": 80, "cy": 30}, "right": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "baseline": 0.1}' >"$T/bad2.json"
expect_error "impossible focal length" "$T/e4.pfm" "bad2.json: impossible focal length" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e4.pfm" --calib "$T/bad2.json"
expect_error "unsupported output" "$T/e5.txt" "e5.txt: write .npy, .pfm or .png" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e5.txt" --disparities 16
expect_error "--depth without --calib" "$T/e6.pfm" "needs --calib" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e6.pfm" --depth "$T/e6.npy"
expect_error "unknown preset" "$T/e7.pfm" "fast or balanced" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e7.pfm" --preset slow
expect_error "one frame" - "two frames" "$SINEW_BIN" stereo "$T/l.pgm" -o "$T/e8.pfm"

# a pair that is not rectified: right(x, y) = left(x + 5, y - 4) -> refused, named
"$PYTHON" - "$T" <<'EOF2'
import random, sys
t = sys.argv[1]
random.seed(11)
W, H = 200, 140
tex = [[random.randrange(256) for _ in range(W // 2 + 8)] for _ in range(H // 2 + 8)]
L = lambda x, y: tex[min(max(y, 0), H - 1) // 2][min(max(x, 0), W + 7) // 2]
for name, f in (('vl', lambda x, y: L(x, y)), ('vr', lambda x, y: L(x + 5, y - 4))):
    with open('%s/%s.pgm' % (t, name), 'wb') as o:
        o.write(b'P5\n%d %d\n255\n' % (W, H))
        o.write(bytes(f(x, y) for y in range(H) for x in range(W)))
EOF2
expect_error "not rectified: named, no output" "$T/v.pfm" "vr.pgm: not rectified with .*vl.pgm: .* 4.0 px apart vertically" \
    "$SINEW_BIN" stereo "$T/vl.pgm" "$T/vr.pgm" -o "$T/v.pfm" --disparities 16
expect_ok "--no-rectify-check skips the test" \
    "$SINEW_BIN" stereo "$T/vl.pgm" "$T/vr.pgm" -o "$T/v.pfm" --disparities 16 --no-rectify-check

# the demo scene's stereo mode: files, calibration, and stereo -> depth scored against the
# exact disparity with --truth/--occ (measured bad-1px 0.40 % at 320x240, seed 1)
if "$SINEW_BIN" synth -o "$T/syn" --frames 2 --size 320x240 --stereo 0.05 >"$T/out" 2>"$T/err" &&
    [ -s "$T/syn/right/000001.png" ] && [ -s "$T/syn/truth/disparity/000001.pfm" ] &&
    [ -s "$T/syn/truth/occlusion_stereo/000001.png" ] && [ -s "$T/syn/stereo_calib.json" ]; then
    pass "synth --stereo writes right frames, exact disparity, calibration"
else fail "synth --stereo writes right frames, exact disparity, calibration" "$(head -c 300 "$T/err")"; fi
if "$SINEW_BIN" stereo "$T/syn/color/000000.png" "$T/syn/right/000000.png" -o "$T/syn_d.pfm" \
    --calib "$T/syn/stereo_calib.json" --depth "$T/syn_z.png" --truth "$T/syn/truth/disparity/000000.pfm" \
    --occ "$T/syn/truth/occlusion_stereo/000000.png" >"$T/out" 2>"$T/err" &&
    "$PYTHON" -c "
import re, sys
m = re.search(r'truth: bad-1px ([0-9.]+)%', open(sys.argv[1]).read())
assert m and float(m.group(1)) <= 0.8, open(sys.argv[1]).read()
" "$T/out" && [ -s "$T/syn_z.png" ]; then
    pass "stereo on the demo scene: bad-1px <= 0.8 % against the exact disparity"
else fail "stereo on the demo scene: bad-1px <= 0.8 % against the exact disparity" "$(cat "$T/out" "$T/err" | head -c 300)"; fi
expect_error "synth --stereo refuses a zero baseline" - "baseline in \(0, 1\]" \
    "$SINEW_BIN" synth -o "$T/syn2" --frames 2 --size 64x48 --stereo 0
expect_error "--occ without --truth" "$T/e9.pfm" "needs --truth" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e9.pfm" --occ "$T/l.pgm"

# Calibration form 2 (a raw rig: intrinsics per camera, R and T). The identity rig
# (principal points at the image centre, R = I, T along -x) rectifies nothing: the
# disparity is byte-identical to the rectified calibration's, depth 500 * 0.2 / 5 = 20 m.
cat >"$T/id_rect.json" <<'EOF2'
{"left": {"fx": 500, "fy": 500, "cx": 79.5, "cy": 29.5},
 "right": {"fx": 500, "fy": 500, "cx": 79.5, "cy": 29.5}, "baseline": 0.2}
EOF2
cat >"$T/id_raw.json" <<'EOF2'
{"left": {"fx": 500, "fy": 500, "cx": 79.5, "cy": 29.5, "k1": 0},
 "right": {"fx": 500, "fy": 500, "cx": 79.5, "cy": 29.5},
 "R": [[1, 0, 0], [0, 1, 0], [0, 0, 1]], "T": [-0.2, 0, 0], "width": 160, "height": 60}
EOF2
if "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/id1.pfm" --disparities 16 --calib "$T/id_rect.json" \
    --depth "$T/id1.npy" >"$T/out" 2>"$T/err" &&
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/id2.pfm" --disparities 16 --calib "$T/id_raw.json" \
        --depth "$T/id2.npy" --check "$T/idchk" >"$T/out" 2>"$T/err" &&
    cmp -s "$T/id1.pfm" "$T/id2.pfm" && cmp -s "$T/id1.npy" "$T/id2.npy" &&
    [ -s "$T/idchk/rectified_left.png" ] && [ -s "$T/idchk/rectified_right.png" ] &&
    grep -q "rectified" "$T/out"; then
    pass "raw identity rig: same disparity and depth bytes as the rectified calibration"
else fail "raw identity rig: same disparity and depth bytes as the rectified calibration" "$(cat "$T/out" "$T/err" | head -c 300)"; fi

# The pair that is not rectified (right = left moved 5 px left and 4 px down) becomes a
# rectified one with the rig that pitches the right camera by atan(4 / 500) = 0.458
# degrees: refused without it, matched with it; depth 500 * 0.2 / 5 = 20 m (median), in
# the left frame's pixels. The opposite pitch doubles the offset and is named.
"$PYTHON" - "$T" <<'EOF2'
import math, sys
t = sys.argv[1]
for name, s in (('pitch', -1), ('wrong', 1)):
    a = s * math.atan(4 / 500)
    c, si = math.cos(a), math.sin(a)
    open('%s/%s.json' % (t, name), 'w').write(
        '{"left": {"fx": 500, "fy": 500, "cx": 99.5, "cy": 69.5}, '
        '"right": {"fx": 500, "fy": 500, "cx": 99.5, "cy": 69.5}, '
        '"R": [[1, 0, 0], [0, %.9f, %.9f], [0, %.9f, %.9f]], "T": [-0.2, 0, 0]}' % (c, -si, si, c))
EOF2
if "$SINEW_BIN" stereo "$T/vl.pgm" "$T/vr.pgm" -o "$T/p.pfm" --disparities 16 --calib "$T/pitch.json" \
    --depth "$T/p.npy" >"$T/out" 2>"$T/err" && "$PYTHON" - "$T" <<'EOF2'
import sys; sys.path.insert(0, sys.argv[1]); from read import npy
w, h, z = npy(sys.argv[1] + '/p.npy')
v = sorted(x for row in z for x in row if x == x)
assert len(v) > 0.9 * w * h, len(v)
assert abs(v[len(v) // 2] - 20) < 0.1, v[len(v) // 2]
EOF2
then pass "raw rig with the pair's pitch: rectified, depth 20 m"
else fail "raw rig with the pair's pitch: rectified, depth 20 m" "$(cat "$T/out" "$T/err" | head -c 300)"; fi
expect_error "raw rig that does not fit the frames: named" "$T/w.pfm" "wrong.json: does not fit .*vl.pgm and .*vr.pgm: after rectification .* 8.0 px apart" \
    "$SINEW_BIN" stereo "$T/vl.pgm" "$T/vr.pgm" -o "$T/w.pfm" --disparities 16 --calib "$T/wrong.json"
printf '{"left": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "right": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "R": [2, 0, 0, 0, 1, 0, 0, 0, 1], "T": [-0.1, 0, 0]}' >"$T/bad3.json"
expect_error "R that is not a rotation" "$T/e10.pfm" "bad3.json: R is not a rotation" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e10.pfm" --calib "$T/bad3.json" --depth "$T/e10.npy"
printf '{"left": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "right": {"fx": 500, "fy": 500, "cx": 80, "cy": 30}, "R": [1, 0, 0, 0, 1, 0, 0, 0, 1], "T": [0, 0, 0]}' >"$T/bad4.json"
expect_error "zero baseline" "$T/e11.pfm" "bad4.json: impossible baseline" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e11.pfm" --calib "$T/bad4.json"
expect_error "raw rig for another frame size" "$T/e12.pfm" "id_raw.json: calibrated for 160x60, frames are 200x140" \
    "$SINEW_BIN" stereo "$T/vl.pgm" "$T/vr.pgm" -o "$T/e12.pfm" --calib "$T/id_raw.json"
expect_error "--depth-rectified without --depth" "$T/e13.pfm" "needs --depth" \
    "$SINEW_BIN" stereo "$T/l.pgm" "$T/r.pgm" -o "$T/e13.pfm" --depth-rectified
