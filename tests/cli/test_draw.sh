# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew draw`: every kind on small inputs made with numpy, picture
# sizes, an independent numpy implementation of the published colour code compared
# pixel by pixel on Middlebury ground truth, and one-line errors for bad input.
. tests/cli/lib.sh

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "draw all" "python3-numpy not available"
    exit 0
fi

# Helper: read an 8-bit RGB PNG without third-party modules (zlib + the five PNG
# filters of the PNG specification, ISO/IEC 15948 section 9) into a numpy array.
cat >"$T/png.py" <<'EOF'
import struct, sys, zlib
import numpy as np

def read_png(path):
    b = open(path, 'rb').read()
    assert b[:8] == b'\x89PNG\r\n\x1a\n', 'not a PNG'
    pos, idat, hdr = 8, b'', None
    while pos < len(b):
        n, t = struct.unpack('>I4s', b[pos:pos + 8])
        d = b[pos + 8:pos + 8 + n]
        if t == b'IHDR':
            hdr = struct.unpack('>IIBBBBB', d)
        elif t == b'IDAT':
            idat += d
        pos += 12 + n
    w, h, depth, ctype = hdr[0], hdr[1], hdr[2], hdr[3]
    assert depth == 8 and ctype == 2, 'expected 8-bit RGB'
    raw = zlib.decompress(idat)
    bpp, stride = 3, 3 * w
    out = np.zeros((h, stride), np.int32)
    prev = np.zeros(stride, np.int32)
    for y in range(h):
        f = raw[y * (stride + 1)]
        line = np.frombuffer(raw, np.uint8, stride, y * (stride + 1) + 1).astype(np.int32)
        cur = np.zeros(stride, np.int32)
        for i in range(stride):
            a = cur[i - bpp] if i >= bpp else 0
            c = prev[i - bpp] if i >= bpp else 0
            up = prev[i]
            if f == 0: p = 0
            elif f == 1: p = a
            elif f == 2: p = up
            elif f == 3: p = (a + up) // 2
            else:
                pa, pb, pc = abs(up - c), abs(a - c), abs(a + up - 2 * c)
                p = a if pa <= pb and pa <= pc else (up if pb <= pc else c)
            cur[i] = (line[i] + p) & 255
        out[y] = cur
        prev = cur
    return out.reshape(h, w, 3)
EOF

# Independent numpy version of the Middlebury colour code (colorcode.cpp, Scharstein
# 2007, published with Baker et al., IJCV 2011).
cat >"$T/wheel.py" <<'EOF'
import numpy as np
def wheel():
    RY, YG, GC, CB, BM, MR = 15, 6, 4, 11, 13, 6
    rows = []
    rows += [(255, 255 * i // RY, 0) for i in range(RY)]
    rows += [(255 - 255 * i // YG, 255, 0) for i in range(YG)]
    rows += [(0, 255, 255 * i // GC) for i in range(GC)]
    rows += [(0, 255 - 255 * i // CB, 255) for i in range(CB)]
    rows += [(255 * i // BM, 0, 255) for i in range(BM)]
    rows += [(255, 0, 255 - 255 * i // MR) for i in range(MR)]
    return np.array(rows, np.float64)
def colour(u, v, maxrad):
    cw = wheel(); n = len(cw)
    fx = u.astype(np.float64) / maxrad; fy = v.astype(np.float64) / maxrad
    known = np.isfinite(fx) & np.isfinite(fy)
    fx = np.where(known, fx, 0); fy = np.where(known, fy, 0)
    rad = np.sqrt(fx * fx + fy * fy)
    a = np.arctan2(-fy, -fx) / np.pi
    fk = (a + 1.0) / 2.0 * (n - 1)
    k0 = fk.astype(np.int64); k1 = (k0 + 1) % n; f = fk - k0
    out = np.zeros(u.shape + (3,), np.int64)
    for b in range(3):
        col = (1 - f) * (cw[k0, b] / 255.0) + f * (cw[k1, b] / 255.0)
        col = np.where(rad <= 1, 1 - rad * (1 - col), col * 0.75)
        out[..., b] = (255.0 * col).astype(np.int64)
    out[~known] = 0
    return out
EOF

# Small inputs: a 40x30 flow, ground truth, maps, mask, frames (PGM), match table.
"$PYTHON" - "$T" <<'EOF'
import sys, json, numpy as np
T = sys.argv[1]
h, w = 30, 40
y, x = np.mgrid[0:h, 0:w].astype(np.float32)
flow = np.stack([np.cos(x / 7) * 4, np.sin(y / 5) * 3], -1).astype(np.float32)
flow[0, 0] = np.nan
np.save(f'{T}/flow.npy', flow)
np.save(f'{T}/truth.npy', (flow + 0.5).astype(np.float32))
np.save(f'{T}/fb.npy', (np.abs(x - 20) / 10).astype(np.float32))
np.save(f'{T}/conf.npy', (x / (w - 1)).astype(np.float32))
np.save(f'{T}/mask.npy', ((x.astype(int) % 7 == 0) * (1 << (y.astype(int) % 6))).astype(np.float32))
np.save(f'{T}/badmask.npy', np.full((h, w), 0.5, np.float32))
with open(f'{T}/frame.pgm', 'wb') as f:
    f.write(b'P5\n%d %d\n255\n' % (w, h)); f.write(((x * 6) % 256).astype(np.uint8).tobytes())
with open(f'{T}/small.pgm', 'wb') as f:
    f.write(b'P5\n%d %d\n255\n' % (8, 8)); f.write(bytes(64))
tab = np.array([[1, 2, 3, 5, 3, 0.9], [2, 20, 15, 22, 16, 0.5], [3, 35, 25, 30, 20, 0.0]], np.float32)
np.save(f'{T}/m.npy', tab)
json.dump({"columns": ["id", "u0", "v0", "u1", "v1", "weight"]}, open(f'{T}/m.json', 'w'))
json.dump({"columns": ["id", "u0"]}, open(f'{T}/short.json', 'w'))
EOF

B=$SINEW_BIN
dims() { "$PYTHON" -c "import sys; sys.path.insert(0, '$T'); from png import read_png; print('%dx%d' % read_png('$1').shape[1::-1])"; }
check_dims() { # NAME FILE WxH
    got=$(dims "$2" 2>&1)
    if [ "$got" = "$3" ]; then pass "$1"; else fail "$1" "picture is $got, expected $3"; fi
}

if "$B" draw --help >"$T/help" 2>&1 && grep -q "not a medical device" "$T/help" &&
    grep -q "examples:" "$T/help"; then pass "draw --help"; else fail "draw --help" "$(head -c 200 "$T/help")"; fi

expect_ok "draw flow" "$B" draw flow --flow "$T/flow.npy" --max 5 --no-legend -o "$T/flow.png"
check_dims "draw flow size" "$T/flow.png" 40x30
expect_ok "draw flow legend" "$B" draw flow --flow "$T/flow.npy" -o "$T/flowl.png"
got=$(dims "$T/flowl.png"); case "$got" in 40x3[1-9]|40x[4-9]?) pass "draw flow legend strip";; *) fail "draw flow legend strip" "$got";; esac
expect_ok "draw arrows" "$B" draw arrows --flow "$T/flow.npy" --frame "$T/frame.pgm" --step 8 --scale 2 -o "$T/arrows.png"
check_dims "draw arrows size" "$T/arrows.png" 40x50
expect_ok "draw fb-error" "$B" draw fb-error --map "$T/fb.npy" --max 2 -o "$T/fb.png"
expect_ok "draw confidence" "$B" draw confidence --map "$T/conf.npy" --no-legend -o "$T/conf.png"
check_dims "draw confidence size" "$T/conf.png" 40x30
expect_ok "draw epe" "$B" draw epe --flow "$T/flow.npy" --truth "$T/truth.npy" -o "$T/epe.png"
expect_ok "draw reasons" "$B" draw reasons --mask "$T/mask.npy" --frame "$T/frame.pgm" -o "$T/reasons.png"
expect_ok "draw matches" "$B" draw matches --table "$T/m.npy" --frame "$T/frame.pgm" --frame1 "$T/small.pgm" --no-legend -o "$T/m.png"
check_dims "draw matches side by side" "$T/m.png" 54x30
expect_ok "draw wheel" "$B" draw wheel --size 64 -o "$T/wheel.png"
check_dims "draw wheel size" "$T/wheel.png" 64x64

# Confidence ramp: lightness never falls from left to right (colour map is ordered).
if "$PYTHON" - "$T" <<'EOF'; then pass "draw confidence ramp ordered"; else fail "draw confidence ramp ordered" "lightness decreases"; fi
import sys; sys.path.insert(0, sys.argv[1])
import numpy as np
from png import read_png
p = read_png(sys.argv[1] + '/conf.png')[5].astype(float) / 255
lin = np.where(p <= 0.04045, p / 12.92, ((p + 0.055) / 1.055) ** 2.4)   # IEC 61966-2-1
Y = lin @ np.array([0.2126, 0.7152, 0.0722])                            # Rec. 709
sys.exit(0 if np.all(np.diff(Y) >= 0) else 1)
EOF

# External check: Middlebury RubberWhale ground truth drawn with --max 5 against the
# numpy colour code, every pixel (unknown pixels black).
if have_data middlebury/RubberWhale; then
    expect_ok "draw flow middlebury" "$B" draw flow --flow "$SINEW_DATA/middlebury/RubberWhale/flow10.flo" \
        --max 5 --no-legend -o "$T/rw.png"
    if msg=$("$PYTHON" - "$T" "$SINEW_DATA/middlebury/RubberWhale/flow10.flo" 2>&1 <<'EOF'
import sys; sys.path.insert(0, sys.argv[1])
import numpy as np
from png import read_png
from wheel import colour
b = open(sys.argv[2], 'rb').read()
w, h = np.frombuffer(b, '<i4', 2, 4)
f = np.frombuffer(b, '<f4', w * h * 2, 12).reshape(h, w, 2).copy()
f[(np.abs(f[..., 0]) > 1e9) | (np.abs(f[..., 1]) > 1e9)] = np.nan   # .flo unknown
ref = colour(f[..., 0], f[..., 1], 5.0)
got = read_png(sys.argv[1] + '/rw.png')
d = np.abs(got - ref)
print('max diff %d, exact %.5f, unknown %d' % (d.max(), np.mean(np.all(d == 0, -1)), np.isnan(f[..., 0]).sum()))
sys.exit(0 if d.max() <= 1 and np.mean(np.all(d == 0, -1)) > 0.999 else 1)
EOF
    ); then pass "draw flow matches numpy colour code ($msg)"; else fail "draw flow matches numpy colour code" "$msg"; fi
else
    skip "draw flow middlebury" "no $SINEW_DATA/middlebury/RubberWhale"
fi

# Bad input: one line naming the file, no output left behind.
expect_error "draw missing flow file" "$T/x1.png" "nope\.flo" "$B" draw flow --flow "$T/nope.flo" -o "$T/x1.png"
expect_error "draw size mismatch" "$T/x2.png" "small\.pgm.*8x8" "$B" draw arrows --flow "$T/flow.npy" --frame "$T/small.pgm" -o "$T/x2.png"
expect_error "draw unknown kind" "$T/x3.png" "unknown kind" "$B" draw rainbow -o "$T/x3.png"
expect_error "draw bad max" "$T/x4.png" "--max" "$B" draw flow --flow "$T/flow.npy" --max -3 -o "$T/x4.png"
expect_error "draw option for another kind" "$T/x5.png" "--mask does not apply" "$B" draw flow --flow "$T/flow.npy" --mask "$T/mask.npy" -o "$T/x5.png"
expect_error "draw missing input" "$T/x6.png" "needs --flow" "$B" draw epe --truth "$T/truth.npy" -o "$T/x6.png"
expect_error "draw mask not integer" "$T/x7.png" "badmask\.npy.*integer" "$B" draw reasons --mask "$T/badmask.npy" -o "$T/x7.png"
expect_error "draw sidecar column count" "$T/x8.png" "short\.json.*column" "$B" draw matches --table "$T/m.npy" --columns "$T/short.json" --frame "$T/frame.pgm" --frame1 "$T/frame.pgm" -o "$T/x8.png"
expect_error "draw map channels" "$T/x9.png" "flow\.npy.*1-channel" "$B" draw fb-error --map "$T/flow.npy" -o "$T/x9.png"
expect_error "draw unwritable output" - "nodir" "$B" draw wheel -o "$T/nodir/w.png"
printf 'garbage' >"$T/junk.flo"
expect_error "draw corrupt flow" "$T/x10.png" "junk\.flo" "$B" draw flow --flow "$T/junk.flo" -o "$T/x10.png"
