# SPDX-License-Identifier: MIT
# Hostile values and shapes through the real binary: 1x1, 1xN and Nx1 inputs through
# every command, NaN/Inf/huge flow values, headers that claim enormous sizes, inputs of
# different sizes, non-finite or out-of-range option values, and disk full (file-size
# limit and, as root, a tiny tmpfs) for every command that writes. Each failure must be
# one stderr line naming the file or option, a non-zero exit and no output file.
# Fixtures are written with numpy (Debian python3-numpy) so they do not depend on sinew.
. tests/cli/lib.sh

# optname "--opt value": the option's bare name, which the one-line error must contain
optname() {
    o=${1%% *}
    echo "${o#--}"
}

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "hostile inputs" "needs $PYTHON with numpy"
    exit 0
fi

# Flow fields of 1x1, 9x1 and 1x9 (W x H) as .npy, plus hostile ones.
"$PYTHON" - "$T" <<'EOF' || fail "fixtures" "numpy could not write them"
import sys, numpy as np
d = sys.argv[1]
rng = np.random.default_rng(7)
for w, h in [(1, 1), (9, 1), (1, 9), (2, 2)]:
    f = (rng.standard_normal((h, w, 2)) * 2).astype('<f4')
    np.save(f"{d}/flow_{w}x{h}.npy", f)
    np.save(f"{d}/back_{w}x{h}.npy", -f)
    np.save(f"{d}/map_{w}x{h}.npy", np.abs(f[..., 0]).astype('<f4'))
    frame = (rng.integers(0, 256, (h, w, 3))).astype(np.uint8)
    # binary PPM written by hand: P6 W H 255
    with open(f"{d}/frame_{w}x{h}.ppm", "wb") as fp:
        fp.write(b"P6\n%d %d\n255\n" % (w, h) + frame.tobytes())
    with open(f"{d}/mask_{w}x{h}.pgm", "wb") as fp:
        fp.write(b"P5\n%d %d\n255\n" % (w, h) + (np.arange(w * h) % 128).astype(np.uint8).tobytes())
# every non-finite and huge value in one field
bad = np.array([np.nan, np.inf, -np.inf, 3.4e38, -3.4e38, 1e30, 2e9, 1e-40, -0.0, 0.5],
               dtype='<f4')
nasty = np.stack([bad, bad[::-1]], axis=-1).reshape(2, 5, 2)
np.save(f"{d}/nasty.npy", nasty)
np.save(f"{d}/nasty_map.npy", nasty[..., 0].copy())
# finite but beyond what KITTI PNG / .flo can store
np.save(f"{d}/huge.npy", np.full((3, 4, 2), 1e30, dtype='<f4'))
# a 4x3 field, to pair with the 2x2 one (different sizes)
np.save(f"{d}/flow_4x3.npy", np.zeros((3, 4, 2), dtype='<f4'))
# headers that claim enormous or empty shapes, with almost no data behind them
def npy_header(shape, descr='<f4'):
    h = "{'descr': '%s', 'fortran_order': False, 'shape': %s, }" % (descr, shape)
    h = h + ' ' * (63 - (10 + len(h)) % 64) + '\n'
    return b'\x93NUMPY\x01\x00' + len(h).to_bytes(2, 'little') + h.encode()
for name, shape in [("giant", "(2147483647, 2147483647, 2)"), ("overflow",
                    "(4294967296, 4294967296, 2)"), ("empty", "(0, 5, 2)"),
                    ("onedim", "(10,)"), ("fivech", "(2, 2, 5)"), ("negative", "(-1, 2, 2)")]:
    with open(f"{d}/{name}.npy", "wb") as fp:
        fp.write(npy_header(shape) + b'\0' * 64)
with open(f"{d}/giant.pfm", "wb") as fp:
    fp.write(b"PF\n1000000 1000000\n-1.0\n" + b'\0' * 64)
with open(f"{d}/giant.flo", "wb") as fp:
    fp.write(b"PIEH" + (2**30).to_bytes(4, 'little') + (2**30).to_bytes(4, 'little') + b'\0' * 64)
with open(f"{d}/giant.pgm", "wb") as fp:
    fp.write(b"P5\n2000000000 2000000000\n255\n" + b'\0' * 64)
with open(f"{d}/zero.pgm", "wb") as fp:
    fp.write(b"P5\n0 5\n255\n")
# a match table with hostile rows and its sidecar
t = np.array([[0, 0, 1, 1, 1], [np.nan, 0, 1, 1, 1], [0, 0, np.inf, 1, 1],
              [3e38, -3e38, 1e30, 0, 1], [0, 0, 0, 0, -1], [0, 0, 0, 0, np.nan]], dtype='<f4')
np.save(f"{d}/table.npy", t)
np.save(f"{d}/table_empty.npy", np.zeros((0, 5), dtype='<f4'))
for n in ("table", "table_empty"):
    with open(f"{d}/{n}.json", "w") as fp:
        fp.write('{"columns": ["u0", "v0", "u1", "v1", "weight"]}')
EOF

# --- convert: tiny shapes round-trip through every format ---------------------------
for s in 1x1 9x1 1x9; do
    for ext in flo png pfm npy; do
        expect_ok "convert $s to .$ext" "$SINEW_BIN" convert "$T/flow_$s.npy" "$T/c_$s.$ext"
        expect_ok "convert $s back from .$ext" "$SINEW_BIN" convert "$T/c_$s.$ext" "$T/r_$s.npy"
    done
    "$PYTHON" -c "
import sys, numpy as np
a, b = np.load('$T/flow_$s.npy'), np.load('$T/r_$s.npy')
sys.exit(0 if a.shape == b.shape else 1)" && pass "convert $s keeps the shape" ||
        fail "convert $s keeps the shape" "shape changed"
done

# --- convert: hostile values ---------------------------------------------------------
# documented (flow/io.h): non-finite values read as unknown; finite values a format
# cannot store are refused before anything is written
expect_ok "nasty values read as unknown (.npy -> .pfm)" \
    "$SINEW_BIN" convert "$T/nasty.npy" "$T/nasty.pfm"
expect_error "huge vectors refused for KITTI PNG" "$T/huge.png" "huge\.png" \
    "$SINEW_BIN" convert "$T/huge.npy" "$T/huge.png"
expect_error "huge vectors refused for .flo" "$T/huge.flo" "huge\.flo" \
    "$SINEW_BIN" convert "$T/huge.npy" "$T/huge.flo"
expect_error "huge vectors refused for float16 .npy" "$T/huge16.npy" "huge16\.npy" \
    "$SINEW_BIN" convert --half "$T/huge.npy" "$T/huge16.npy"

# --- headers claiming enormous, empty or wrong shapes ----------------------------------
for n in giant overflow empty onedim fivech negative; do
    expect_error "npy header $n" "$T/out_$n.flo" "$n\.npy" \
        "$SINEW_BIN" convert "$T/$n.npy" "$T/out_$n.flo"
done
expect_error "PFM header 1e6 x 1e6" "$T/out_pfm.flo" "giant\.pfm" \
    "$SINEW_BIN" convert "$T/giant.pfm" "$T/out_pfm.flo"
expect_error ".flo header 2^30 x 2^30" "$T/out_flo.npy" "giant\.flo" \
    "$SINEW_BIN" convert "$T/giant.flo" "$T/out_flo.npy"
expect_error "PGM header 2e9 x 2e9 as a frame" "$T/g.png" "giant\.pgm" \
    "$SINEW_BIN" draw arrows --flow "$T/flow_2x2.npy" --frame "$T/giant.pgm" -o "$T/g.png"
expect_error "PGM header with width 0 as a frame" "$T/z.png" "zero\.pgm" \
    "$SINEW_BIN" draw arrows --flow "$T/flow_2x2.npy" --frame "$T/zero.pgm" -o "$T/z.png"

# --- draw: every kind on tiny shapes, with and without legend ---------------------------
for s in 1x1 9x1 1x9 2x2; do
    for leg in "" --no-legend; do
        expect_ok "draw flow $s $leg" "$SINEW_BIN" draw flow --flow "$T/flow_$s.npy" $leg -o "$T/d.png"
        expect_ok "draw arrows $s $leg" "$SINEW_BIN" draw arrows --flow "$T/flow_$s.npy" \
            --frame "$T/frame_$s.ppm" --step 2 $leg -o "$T/d.png"
        expect_ok "draw fb-error $s $leg" "$SINEW_BIN" draw fb-error --map "$T/map_$s.npy" $leg -o "$T/d.png"
        expect_ok "draw confidence $s $leg" "$SINEW_BIN" draw confidence --map "$T/map_$s.npy" $leg -o "$T/d.png"
        expect_ok "draw epe $s $leg" "$SINEW_BIN" draw epe --flow "$T/flow_$s.npy" \
            --truth "$T/back_$s.npy" $leg -o "$T/d.png"
        expect_ok "draw reasons $s $leg" "$SINEW_BIN" draw reasons --mask "$T/mask_$s.pgm" \
            --frame "$T/frame_$s.ppm" $leg -o "$T/d.png"
        expect_ok "draw matches $s $leg" "$SINEW_BIN" draw matches --table "$T/table.npy" \
            --frame "$T/frame_$s.ppm" --frame1 "$T/frame_1x1.ppm" $leg -o "$T/d.png"
    done
done
expect_ok "draw flow with NaN/Inf/huge values" "$SINEW_BIN" draw flow --flow "$T/nasty.npy" -o "$T/n.png"
expect_ok "draw arrows with NaN/Inf/huge values" "$SINEW_BIN" draw arrows --flow "$T/nasty.npy" \
    --step 2 --scale 1000 -o "$T/n.png"
expect_ok "draw fb-error map with NaN/Inf/huge values" "$SINEW_BIN" draw fb-error \
    --map "$T/nasty_map.npy" -o "$T/n.png"
expect_ok "draw epe with NaN/Inf/huge values" "$SINEW_BIN" draw epe --flow "$T/nasty.npy" \
    --truth "$T/nasty.npy" -o "$T/n.png"
expect_ok "draw matches with hostile rows" "$SINEW_BIN" draw matches --table "$T/table.npy" \
    --frame "$T/frame_2x2.ppm" --frame1 "$T/frame_9x1.ppm" -o "$T/n.png"
# a table of 0 rows (every pixel rejected) draws the two frames alone (docs/robustness.md)
expect_ok "draw matches from an empty table" \
    "$SINEW_BIN" draw matches --table "$T/table_empty.npy" \
    --frame "$T/frame_2x2.ppm" --frame1 "$T/frame_2x2.ppm" -o "$T/n0.png"

# --- draw: inputs of different sizes ---------------------------------------------------
expect_error "epe: truth of another size" "$T/e.png" "flow_4x3\.npy|flow_2x2\.npy|4x3|2x2" \
    "$SINEW_BIN" draw epe --flow "$T/flow_2x2.npy" --truth "$T/flow_4x3.npy" -o "$T/e.png"
expect_error "arrows: frame of another size" "$T/e.png" "frame_9x1\.ppm|9x1|2x2" \
    "$SINEW_BIN" draw arrows --flow "$T/flow_2x2.npy" --frame "$T/frame_9x1.ppm" -o "$T/e.png"
expect_error "reasons: frame of another size" "$T/e.png" "frame_1x9\.ppm|1x9|2x2" \
    "$SINEW_BIN" draw reasons --mask "$T/mask_2x2.pgm" --frame "$T/frame_1x9.ppm" -o "$T/e.png"

# --- draw: hostile option values (usage errors, exit 2) ---------------------------------
for opt in "--max nan" "--max inf" "--max -1" "--max 1e999" "--step 0" "--step -4" \
    "--step 99999999999" "--scale nan" "--scale -inf" "--threads -1" "--threads nan"; do
    # shellcheck disable=SC2086
    expect_error "draw arrows $opt" "$T/o.png" "$(optname "$opt")" \
        "$SINEW_BIN" draw arrows --flow "$T/flow_2x2.npy" $opt -o "$T/o.png"
done
for opt in "--size 0" "--size -5" "--size 1000000000" "--size nan"; do
    # shellcheck disable=SC2086
    expect_error "draw wheel $opt" "$T/o.png" "size" "$SINEW_BIN" draw wheel $opt -o "$T/o.png"
done
for opt in "--count 0" "--count -1" "--count nan"; do
    # shellcheck disable=SC2086
    expect_error "draw matches $opt" "$T/o.png" "count" "$SINEW_BIN" draw matches \
        --table "$T/table.npy" --frame "$T/frame_2x2.ppm" --frame1 "$T/frame_2x2.ppm" $opt -o "$T/o.png"
done

# --- synth: documented minimum 8x8 and 2..1000000 frames; the pixel limit before work ---
if "$SINEW_BIN" synth --help >/dev/null 2>&1; then
    for a in "--size 1x1" "--size 9x1" "--size 1x9" "--size 0x0" "--size -8x8" "--frames 1" \
        "--frames 0" "--frames nan" "--frames 1000001"; do
        # shellcheck disable=SC2086
        expect_error "synth $a" "$T/syn" "$(optname "$a")" "$SINEW_BIN" synth -o "$T/syn" $a
    done
    expect_error "synth beyond the pixel limit" "$T/syn" "limit" \
        "$SINEW_BIN" synth -o "$T/syn" --size 100000x100000 --frames 2
    expect_ok "synth at the smallest size" "$SINEW_BIN" synth -o "$T/syn8" --size 8x8 --frames 2
else
    fail "synth hostile sizes" "sinew synth --help failed"
fi

mkdir -p "$T/csvdir" "$T/dir.flo"

# --- flow estimator: tiny shapes, frames that disagree, hostile options ---------------------
if "$SINEW_BIN" flow --help >/dev/null 2>&1; then
    for s in 1x1 9x1 1x9 2x2; do
        expect_ok "flow $s" "$SINEW_BIN" flow "$T/frame_$s.ppm" "$T/frame_$s.ppm" -o "$T/fl_$s.npy" \
            --backward "$T/flb_$s.flo" --preset fast --threads 1
        "$PYTHON" -c "
import sys, numpy as np
f = np.load('$T/fl_$s.npy')
sys.exit(0 if f.shape[:2] == np.load('$T/flow_$s.npy').shape[:2] and np.isfinite(f).all() else 1)" &&
            pass "flow $s: right shape, finite" || fail "flow $s: right shape, finite" "bad output"
    done
    expect_error "flow: frames of different sizes" "$T/fd.flo" "frame_9x1\.ppm|frame_1x9\.ppm|9x1|1x9" \
        "$SINEW_BIN" flow "$T/frame_9x1.ppm" "$T/frame_1x9.ppm" -o "$T/fd.flo"
    expect_error "flow: giant frame header" "$T/fg.flo" "giant\.pgm" \
        "$SINEW_BIN" flow "$T/giant.pgm" "$T/giant.pgm" -o "$T/fg.flo"
    expect_error "flow: backward output is a directory" "$T/fo.flo" "dir\.flo.*directory" \
        "$SINEW_BIN" flow "$T/frame_2x2.ppm" "$T/frame_2x2.ppm" -o "$T/fo.flo" --backward "$T/dir.flo"
    for opt in "--alpha nan" "--alpha -1" "--alpha inf" "--levels 99" "--levels -2" "--warps 1000" \
        "--patch-size 2" "--median 9" "--threads -1" "--preset nope" "--inner 0" \
        "--work-mib 0" "--work-mib 70000"; do
        # range errors come from the library, which names the parameter field (dis_patch,
        # work_mib)
        # shellcheck disable=SC2086
        expect_error "flow $opt" "$T/fp.flo" "$(optname "$opt")|$(optname "$opt" | tr - _) =|dis_patch = 2" \
            "$SINEW_BIN" flow "$T/frame_2x2.ppm" "$T/frame_2x2.ppm" -o "$T/fp.flo" $opt
    done
else
    fail "flow hostile inputs" "sinew flow --help failed"
fi

# --- score: tiny shapes, hostile values, sizes that disagree -------------------------------
if "$SINEW_BIN" score --help >/dev/null 2>&1; then
    for s in 1x1 9x1 1x9; do
        expect_ok "score $s with confidence" "$SINEW_BIN" score "$T/flow_$s.npy" "$T/back_$s.npy" \
            --confidence "$T/map_$s.npy" --mask "$T/mask_$s.pgm" --occ "$T/mask_$s.pgm"
    done
    "$PYTHON" -c "import numpy as np; np.save('$T/zero52.npy', np.zeros((2, 5, 2), '<f4'))"
    # documented (flow/metrics.h): non-finite estimates or truth are unknown, not scored
    expect_ok "score NaN/Inf/huge estimate" "$SINEW_BIN" score "$T/nasty.npy" "$T/zero52.npy" \
        --confidence "$T/nasty_map.npy" --json
    expect_ok "score NaN/Inf/huge truth" "$SINEW_BIN" score "$T/zero52.npy" "$T/nasty.npy"
    expect_error "score: truth of another size" - "flow_2x2\.npy.*flow_4x3\.npy|flow_4x3" \
        "$SINEW_BIN" score "$T/flow_2x2.npy" "$T/flow_4x3.npy"
    expect_error "score: confidence of another size" - "map_1x9\.npy" \
        "$SINEW_BIN" score "$T/flow_2x2.npy" "$T/back_2x2.npy" --confidence "$T/map_1x9.npy"
    mkdir -p "$T/csvdir"
    expect_error "score: CSV output is a directory" - "csvdir.*directory" \
        "$SINEW_BIN" score "$T/flow_2x2.npy" "$T/back_2x2.npy" --csv "$T/csvdir"
    for opt in "--mask-bits -1" "--mask-bits 256" "--threads nan" "--threads -1"; do
        # shellcheck disable=SC2086
        expect_error "score $opt" - "${opt%% *}" \
            "$SINEW_BIN" score "$T/flow_2x2.npy" "$T/back_2x2.npy" $opt
    done
    expect_error "score: giant .npy header" - "giant\.npy" \
        "$SINEW_BIN" score "$T/giant.npy" "$T/flow_2x2.npy"
else
    fail "score hostile inputs" "sinew score --help failed"
fi

# --- an output path that is a FIFO is refused, not replaced ------------------------------
if mkfifo "$T/pipe.flo" 2>/dev/null; then
    expect_error "output is a FIFO" - "pipe\.flo.*regular" \
        "$SINEW_BIN" convert "$T/flow_2x2.npy" "$T/pipe.flo"
    if [ -p "$T/pipe.flo" ]; then pass "FIFO left in place"; else fail "FIFO left in place" "replaced"; fi
    rm -f "$T/pipe.flo"
else
    skip "output is a FIFO" "mkfifo failed"
fi

# --- report: missing, unreadable and absurdly nested manifests ---------------------------
mkdir -p "$T/rep_empty" "$T/rep_dir/manifest.json" "$T/rep_deep"
"$PYTHON" -c "print('[' * 100000 + ']' * 100000)" >"$T/rep_deep/manifest.json"
expect_error "report: no manifest" "$T/rep_empty/report.html" "rep_empty/manifest\.json" \
    "$SINEW_BIN" report "$T/rep_empty"
expect_error "report: manifest is a directory" "$T/rep_dir/report.html" "rep_dir/manifest\.json" \
    "$SINEW_BIN" report "$T/rep_dir"
expect_error "report: manifest nested 100000 deep" "$T/rep_deep/report.html" \
    "rep_deep/manifest\.json" "$SINEW_BIN" report "$T/rep_deep"

# --- disk full via a file-size limit (no root needed; SIGXFSZ must not kill sinew) ------
limited() { # BLOCKS OUT CMD...: run CMD under `ulimit -f BLOCKS` (512-byte blocks)
    b=$1; o=$2; shift 2
    ( ulimit -f "$b"; exec "$@" ) >"$T/out" 2>"$T/err"; rc=$?
    if [ "$rc" -ge 128 ]; then echo "killed by signal (exit $rc)"; return; fi
    if [ "$rc" -eq 0 ]; then echo "exit 0 despite the limit"; return; fi
    if [ "$(wc -l <"$T/err")" -ne 1 ] || ! grep -q "$(basename "$o")" "$T/err"; then
        echo "stderr: $(head -c 300 "$T/err")"; return; fi
    if [ -e "$o" ] || ls -a "$(dirname "$o")" | grep -q "$(basename "$o").tmp-"; then
        echo "partial output left behind"; return; fi
}
check_limited() { # NAME BLOCKS OUT CMD...
    n=$1; shift
    why=$(limited "$@")
    if [ -z "$why" ]; then pass "$n"; else fail "$n" "$why"; fi
}
mkdir -p "$T/lim"
check_limited "file-size limit: draw wheel" 16 "$T/lim/wheel.png" \
    "$SINEW_BIN" draw wheel --size 1500 -o "$T/lim/wheel.png"
"$PYTHON" -c "import numpy as np; np.save('$T/big.npy', np.random.default_rng(1).standard_normal((300, 400, 2)).astype('<f4'))"
for ext in flo png pfm npy; do
    check_limited "file-size limit: convert to .$ext" 16 "$T/lim/big.$ext" \
        "$SINEW_BIN" convert "$T/big.npy" "$T/lim/big.$ext"
done
check_limited "file-size limit: draw flow" 16 "$T/lim/flow.png" \
    "$SINEW_BIN" draw flow --flow "$T/big.npy" -o "$T/lim/flow.png"
# an earlier output survives a failed overwrite
"$SINEW_BIN" draw wheel --size 32 -o "$T/lim/keep.png" && cp "$T/lim/keep.png" "$T/keep.copy"
why=$(limited 16 "$T/lim/keep.png" "$SINEW_BIN" draw wheel --size 1500 -o "$T/lim/keep.png")
case "$why" in
    "partial output left behind") # expected: keep.png exists, it must be the old one
        if cmp -s "$T/lim/keep.png" "$T/keep.copy" && ! ls -a "$T/lim" | grep -q '\.tmp-'; then
            pass "file-size limit: earlier picture intact"
        else fail "file-size limit: earlier picture intact" "keep.png changed or temporary left"; fi ;;
    *) fail "file-size limit: earlier picture intact" "${why:-exit 0 despite the limit}" ;;
esac

# --- disk full on a 64 KiB tmpfs, for the picture writer (root only) ---------------------
tiny=$(mktemp -d "${TMPDIR:-/tmp}/sinew-hostile.XXXXXX")
if mount -t tmpfs -o size=64k tmpfs "$tiny" 2>/dev/null; then
    expect_ok "tmpfs: small picture fits" "$SINEW_BIN" draw wheel --size 32 -o "$tiny/w.png"
    cp "$tiny/w.png" "$T/w.copy"
    expect_error "tmpfs: large picture refused" "$tiny/big.png" "big\.png.*(No space|space)" \
        "$SINEW_BIN" draw wheel --size 1500 -o "$tiny/big.png"
    expect_error "tmpfs: overwrite refused" - "w\.png" \
        "$SINEW_BIN" draw wheel --size 1500 -o "$tiny/w.png"
    if cmp -s "$tiny/w.png" "$T/w.copy"; then pass "tmpfs: earlier picture intact"
    else fail "tmpfs: earlier picture intact" "w.png changed"; fi
    if ls -a "$tiny" | grep -q '\.tmp-'; then fail "tmpfs: no temporary files" "$(ls -a "$tiny")"
    else pass "tmpfs: no temporary files"; fi
    umount "$tiny"
else
    skip "tmpfs disk full for pictures" "cannot mount a tmpfs (needs root)"
fi
rmdir "$tiny" 2>/dev/null
