# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew convert` and the top-level --help/--version: every
# Middlebury ground-truth .flo (Baker et al., IJCV 2011; read from $SINEW_DATA) round-trips through
# .npy and PFM bit-exactly and through KITTI PNG within 1/128 px (checked with numpy);
# malformed inputs give one stderr line naming the file, a non-zero exit and no output.
. "$(dirname "$0")/lib.sh"

# ---- help and version ----
if "$SINEW_BIN" --help >"$T/h" 2>&1 && grep -q 'convert' "$T/h" && grep -q 'research tool' "$T/h"; then
    pass "sinew --help lists convert and the notice"
else fail "sinew --help" "$(head -c 300 "$T/h")"; fi
if "$SINEW_BIN" convert --help >"$T/h" 2>&1 && grep -q 'sinew convert' "$T/h" &&
    grep -q 'examples' "$T/h" && grep -q 'research tool' "$T/h"; then
    pass "sinew convert --help has examples and the notice"
else fail "sinew convert --help" "$(head -c 300 "$T/h")"; fi
if "$SINEW_BIN" --version 2>&1 | grep -Eq '^sinew [0-9]+\.[0-9]+\.[0-9]+$'; then
    pass "sinew --version"
else fail "sinew --version" "unexpected output"; fi

# ---- malformed inputs and bad arguments ----
printf 'PIEH\002\000\000\000\002\000\000\000\000\000' >"$T/trunc.flo"
printf 'PIEX\001\000\000\000\001\000\000\000\000\000\000\000\000\000\000\000' >"$T/magic.flo"
printf 'PIEH\100\015\003\000\100\015\003\000' >"$T/huge.flo" # 200000 x 200000
: >"$T/empty.flo"
printf 'PF\n1 1\nnan\n' >"$T/nan.pfm"
printf '\223NUMPY\001\000\020\000{"descr": "<i4"' >"$T/bad.npy"
printf 'hello' >"$T/x.txt"
printf 'Pf\n1 1\n-1\n\000\000\000\000' >"$T/one.pfm"
printf '\211PNG\r\n\032\n\000\000\000\015IHDR' >"$T/cut.png"
o="$T/out.npy"
expect_error "truncated .flo" "$o" 'trunc\.flo: truncated' "$SINEW_BIN" convert "$T/trunc.flo" "$o"
expect_error "wrong magic .flo" "$o" 'magic\.flo: .*bad tag' "$SINEW_BIN" convert "$T/magic.flo" "$o"
expect_error "huge .flo header" "$o" 'huge\.flo: 200000x200000' "$SINEW_BIN" convert "$T/huge.flo" "$o"
expect_error "empty .flo" "$o" 'empty\.flo: empty file' "$SINEW_BIN" convert "$T/empty.flo" "$o"
expect_error "NaN PFM scale" "$o" 'nan\.pfm: ' "$SINEW_BIN" convert "$T/nan.pfm" "$o"
expect_error "truncated .npy header" "$o" 'bad\.npy: truncated' "$SINEW_BIN" convert "$T/bad.npy" "$o"
expect_error "unknown input extension" "$o" 'x\.txt: unknown flow file extension' \
    "$SINEW_BIN" convert "$T/x.txt" "$o"
expect_error "1-channel PFM" "$o" 'one\.pfm: .*not a flow field' "$SINEW_BIN" convert "$T/one.pfm" "$o"
expect_error "truncated PNG" "$o" 'cut\.png: truncated' "$SINEW_BIN" convert "$T/cut.png" "$o"
expect_error "missing input" "$o" 'nope\.flo: cannot open' "$SINEW_BIN" convert "$T/nope.flo" "$o"
expect_error "no arguments" - 'expected IN and OUT' "$SINEW_BIN" convert
expect_error "unknown option" - "unknown option '--frobnicate'" "$SINEW_BIN" convert --frobnicate a.flo b.flo

# ---- Middlebury ground truth ----
if ! have_data middlebury; then
    skip "middlebury round trips" "no data in $SINEW_DATA"
    exit 0
fi
# Middlebury ground truth (Baker et al., IJCV 2011) and, for motions up to 78 px, the two
# FlyingChairs examples, as paths relative to the data folder.
SEQS="middlebury/Dimetrodon/flow10.flo middlebury/Grove2/flow10.flo
middlebury/Grove3/flow10.flo middlebury/Hydrangea/flow10.flo
middlebury/RubberWhale/flow10.flo middlebury/Urban2/flow10.flo middlebury/Urban3/flow10.flo
middlebury/Venus/flow10.flo flyingchairs/examples/0000000-gt.flo
flyingchairs/examples/0000001-gt.flo"
G="$SINEW_DATA/middlebury/Venus/flow10.flo"
expect_error "unknown output extension" "$T/v.bmp" 'v\.bmp: unknown flow file extension' \
    "$SINEW_BIN" convert "$G" "$T/v.bmp"
expect_error "--half needs .npy" "$T/v.flo" 'v\.flo: --half needs a \.npy output' \
    "$SINEW_BIN" convert --half "$G" "$T/v.flo"
expect_error "missing output folder" "$T/no/v.npy" 'no/v\.npy: cannot create' \
    "$SINEW_BIN" convert "$G" "$T/no/v.npy"
# a flow beyond the KITTI range: scale Venus by 100 through numpy, then convert to PNG
if "$PYTHON" -c 'import numpy' 2>/dev/null; then
    "$SINEW_BIN" convert "$G" "$T/venus.npy" &&
        "$PYTHON" -c "import numpy as np, sys; a = np.load(sys.argv[1]); np.save(sys.argv[2], a * 100)" \
            "$T/venus.npy" "$T/big.npy"
    expect_error "KITTI range refused" "$T/big.png" 'big\.png: flow .* outside the KITTI PNG range' \
        "$SINEW_BIN" convert "$T/big.npy" "$T/big.png"
else
    skip "KITTI range refused" "python3-numpy missing"
fi

ok=1
present=""
for s in $SEQS; do
    in="$SINEW_DATA/$s"
    [ -f "$in" ] || { skip "round trip $s" "missing $in"; continue; }
    present="$present $s"
    d="$T/$s"; mkdir -p "$d"
    if "$SINEW_BIN" convert "$in" "$d/a.npy" &&
        "$SINEW_BIN" convert "$d/a.npy" "$d/b.flo" &&
        "$SINEW_BIN" convert "$in" "$d/c.pfm" &&
        "$SINEW_BIN" convert "$d/c.pfm" "$d/d.npy" &&
        "$SINEW_BIN" convert "$in" "$d/e.png" &&
        "$SINEW_BIN" convert "$d/e.png" "$d/f.npy" &&
        "$SINEW_BIN" convert "$d/c.pfm" "$d/g.flo" &&
        "$SINEW_BIN" convert --half "$in" "$d/h.npy" 2>"$T/err"; then
        :
    else
        fail "convert $s" "$(head -c 300 "$T/err")"; ok=0
    fi
    # .npy and PFM carry the same float32 values: byte-identical files
    if cmp -s "$d/a.npy" "$d/d.npy" && cmp -s "$d/b.flo" "$d/g.flo"; then
        pass "$s: .flo -> PFM -> .npy equals .flo -> .npy byte for byte"
    else fail "$s PFM round trip" "files differ"; fi
done

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "numpy checks of the round trips" "python3-numpy missing"
    exit 0
fi
cat >"$T/check.py" <<'EOF'
# Compare the converted files with the original .flo (read here with numpy alone,
# following the Middlebury layout: "PIEH", int32 w, h, float32 (u, v) row-major; unknown
# where |u| or |v| > 1e9).
import sys, numpy as np
T, data = sys.argv[1], sys.argv[2]
for s in sys.argv[3:]:
    raw = np.fromfile('%s/%s' % (data, s), dtype='<f4')
    w, h = np.frombuffer(raw[1:3].tobytes(), '<i4')
    gt = raw[3:].reshape(h, w, 2)
    unk = (np.abs(gt) > 1e9).any(axis=2)
    def bad(msg):
        print('FAIL: %s: %s' % (s, msg))
    a = np.load('%s/%s/a.npy' % (T, s))
    if a.shape != (h, w, 2) or a.dtype != np.float32:
        bad('a.npy shape %s %s' % (a.shape, a.dtype)); continue
    if not (np.isnan(a).any(axis=2) == unk).all() or not np.array_equal(
            a[~unk].view(np.uint32), gt[~unk].view(np.uint32)):
        bad('.npy values differ from the .flo'); continue
    print('PASS: %s: .flo -> .npy bit-exact, %d unknown as NaN' % (s, unk.sum()))
    b = np.fromfile('%s/%s/b.flo' % (T, s), dtype='<f4')
    bb = b[3:].reshape(h, w, 2)
    if b[:3].tobytes() != raw[:3].tobytes() or not np.array_equal(
            bb[~unk].view(np.uint32), gt[~unk].view(np.uint32)) or not (bb[unk] == np.float32(1e10)).all():
        bad('.npy -> .flo differs'); continue
    print('PASS: %s: .npy -> .flo bit-exact, unknown written as 1e10' % s)
    f = np.load('%s/%s/f.npy' % (T, s))
    err = np.abs(f[~unk] - gt[~unk]).max() if (~unk).any() else 0
    if not (np.isnan(f).any(axis=2) == unk).all() or err > 1 / 128:
        bad('KITTI round trip error %g' % err); continue
    print('PASS: %s: KITTI PNG round trip max error %.5f <= 1/128 px' % (s, err))
    hf = np.load('%s/%s/h.npy' % (T, s))
    ref = a.astype(np.float16)
    if hf.dtype != np.float16 or not np.array_equal(hf, ref, equal_nan=True):
        bad('--half output differs from numpy float16 rounding'); continue
    print('PASS: %s: --half equals numpy float16 rounding' % s)
EOF
"$PYTHON" "$T/check.py" "$T" "$SINEW_DATA" $present 2>&1 | sed 's/^Traceback/FAIL: python: Traceback/'
