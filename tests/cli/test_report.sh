# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew report`: a small run folder in the manifest format of
# flow/run.h ("sinew run manifest 1") with pair files as docs/formats.md "Report input"
# describes; the page must be self-contained (no external references), carry its
# thumbnails and plots, and render in headless Chromium with a non-blank screenshot,
# no console errors and no network requests. Chromium is optional: those checks SKIP
# when it is absent (install with SINEW_EXTRA_DEPS=chromium tools/install-deps).
. tests/cli/lib.sh

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "report all" "python3-numpy not available"
    exit 0
fi
B=$SINEW_BIN
R="$T/run"

# Run folder: 5 frames, 4 pairs; pair 2 failed; pair 3 has stats with ground-truth
# scores; pair 1 has no stats (the report derives them from its files); frame 4 missing.
"$PYTHON" - "$R" <<'EOF'
import json, os, struct, sys, zlib
import numpy as np
R = sys.argv[1]
os.makedirs(R + '/frames')
h, w = 48, 64
y, x = np.mgrid[0:h, 0:w].astype(np.float32)

def png_gray(path, a):  # 8-bit gray PNG (ISO/IEC 15948: IHDR, IDAT with filter 0, IEND)
    def chunk(t, d):
        return struct.pack('>I', len(d)) + t + d + struct.pack('>I', zlib.crc32(t + d) & 0xffffffff)
    raw = b''.join(b'\0' + a[r].astype(np.uint8).tobytes() for r in range(a.shape[0]))
    open(path, 'wb').write(b'\x89PNG\r\n\x1a\n' + chunk(b'IHDR', struct.pack('>IIBBBBB', a.shape[1], a.shape[0], 8, 0, 0, 0, 0))
                           + chunk(b'IDAT', zlib.compress(raw)) + chunk(b'IEND', b''))

inputs = []
for k in range(5):
    p = f'{R}/frames/{k:06d}.pgm'
    if k < 4:
        with open(p, 'wb') as f:
            f.write(b'P5\n%d %d\n255\n' % (w, h))
            f.write(((x * 3 + y * 2 + 40 * k) % 256).astype(np.uint8).tobytes())
    inputs.append({'path': p, 'role': 'color', 'bytes': 3087, 'sha256': '%064x' % k})
pairs = []
for k in range(4):
    name = f'{k:06d}-{k + 1:06d}'
    d = f'{R}/pairs/{name}'
    os.makedirs(d)
    e = {'pair': name, 'frames': [k, k + 1], 'status': 'done'}
    if k == 2:
        e = {'pair': name, 'frames': [k, k + 1], 'status': 'failed',
             'error': f'{d}/forward.flo: <truncated> & unreadable'}
        pairs.append(e); continue
    flow = np.stack([np.cos(x / 9 + k) * 3, np.sin(y / 7) * 2], -1).astype(np.float32)
    np.save(d + '/forward.npy', flow)
    np.save(d + '/confidence.npy', np.clip(1 - np.abs(x - 32) / 40, 0, 1).astype(np.float32))
    fb = (np.abs(y - 24) / 12).astype(np.float32); fb[0, :5] = np.nan
    np.save(d + '/fb_error.npy', fb)
    png_gray(d + '/mask.png', ((x.astype(int) // 8 % 8 == k) * (1 << (y.astype(int) // 8 % 7))))
    if k == 0:
        e['stats'] = {'kept_fraction': 0.91, 'mean_confidence': 0.8, 'fb_error_mean': 0.4}
    if k == 3:
        e['stats'] = {'kept_fraction': 0.85, 'mean_confidence': 0.7, 'fb_error_mean': 0.6,
                      'epe': 0.35, 'occlusion_f1': 0.62, 'warnings': ['depth scale looks like millimetres']}
    pairs.append(e)
man = {'format': 'sinew run manifest 1', 'sinew_version': '0.1.0',
       'options': {'preset': 'balanced', 'schedule': 'consecutive'}, 'frames': 5,
       'inputs': inputs, 'summary': {'pairs': 4, 'done': 3, 'failed': 1, 'pending': 0},
       'warnings': ['frame 000004 is missing on disk'], 'pairs': pairs}
json.dump(man, open(R + '/manifest.json', 'w'), indent=1)
EOF

if "$B" report --help >"$T/help" 2>&1 && grep -q "not a medical device" "$T/help"; then
    pass "report --help"; else fail "report --help" "$(head -c 200 "$T/help")"; fi
expect_ok "report writes the page" "$B" report "$R"
H="$R/report.html"

# Static checks on the page itself.
if msg=$("$PYTHON" - "$H" 2>&1 <<'EOF'
import re, sys
s = open(sys.argv[1], encoding='utf-8').read()
imgs = re.findall(r'<img [^>]*src="([^"]*)"', s)
assert all(u.startswith('data:image/png;base64,') for u in imgs), 'non-inline image'
assert len(imgs) >= 3 * 4 + 1, 'expected 3 pairs x 4 thumbnails + wheel, got %d' % len(imgs)
assert s.count('<svg') == 5, 'expected 5 plots (kept, confidence, fb, epe, f1), got %d' % s.count('<svg')
ext = re.findall(r'(?:src|href|action)\s*=\s*"(?!data:)[^"]+"', s) + re.findall(r'url\(', s) + re.findall(r'@import', s)
assert not ext, 'external reference: %r' % ext[:3]
assert "default-src 'none'" in s, 'no content security policy'
assert '<script' not in s.lower(), 'script in page'
assert '&lt;truncated&gt; &amp; unreadable' in s, 'error message not escaped'
assert 'depth scale looks like millimetres' in s and 'frame 000004 is missing' in s, 'warnings missing'
assert 'sinew run manifest 1' in s
# pair 1 had no stats: the kept fraction is derived from mask.png (one column band of 8 of
# 64 columns has reasons where the row band bit is nonzero: every row band has a bit set)
assert re.search(r'000001-000002.*?0\.875', s, re.S), 'derived kept fraction missing'
print('%d images, %d plots' % (len(imgs), s.count('<svg')))
EOF
); then pass "report page self-contained ($msg)"; else fail "report page self-contained" "$msg"; fi

# Deterministic: a second run writes the same bytes.
cp "$H" "$T/first.html"
"$B" report "$R" >/dev/null 2>&1
if cmp -s "$H" "$T/first.html"; then pass "report deterministic"; else fail "report deterministic" "pages differ"; fi

# Options and errors.
expect_ok "report --pictures 0" "$B" report --pictures 0 -o "$T/nopics.html" "$R"
if ! grep -q '<figure><img' "$T/nopics.html"; then pass "report without pictures"; else fail "report without pictures" "thumbnails present"; fi
mkdir -p "$T/empty"
expect_error "report missing manifest" "$T/empty/report.html" "manifest\.json" "$B" report "$T/empty"
printf '{"pairs": [' >"$T/empty/manifest.json"
expect_error "report corrupt manifest" "$T/empty/report.html" "manifest\.json.*JSON" "$B" report "$T/empty"
printf '{"pairs": 3}' >"$T/empty/manifest.json"
expect_error "report no pair list" "$T/empty/report.html" "pairs" "$B" report "$T/empty"
printf '{"pairs": [{"pair": "../../x"}, {}]}' >"$T/empty/manifest.json"
expect_ok "report tolerates odd pairs" "$B" report "$T/empty"
expect_error "report bad option" - "--thumb-width" "$B" report --thumb-width 5 "$R"
expect_error "report unwritable output" - "nodir" "$B" report -o "$T/nodir/r.html" "$R"

# Headless Chromium: screenshot non-blank, no console errors, no network requests.
CHROME=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$CHROME" ]; then
    skip "report renders in chromium" "chromium not installed (SINEW_EXTRA_DEPS=chromium tools/install-deps)"
    exit 0
fi
run_chrome() { # OUTFLAG... : fresh profile each time
    prof=$(mktemp -d "$T/prof.XXXXXX")
    timeout 120 "$CHROME" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync \
        --disable-default-apps --disable-extensions "--host-resolver-rules=MAP * ~NOTFOUND" \
        --enable-logging=stderr --v=0 --user-data-dir="$prof" --window-size=1280,2400 "$@"
}
run_chrome --screenshot="$T/shot.png" "file://$H" >"$T/chrome.out" 2>"$T/chrome.err"
if [ -s "$T/shot.png" ] && msg=$("$PYTHON" - "$T/shot.png" 2>&1 <<'EOF'
import struct, sys, zlib
import numpy as np
b = open(sys.argv[1], 'rb').read()
pos, idat, hdr = 8, b'', None
while pos < len(b):
    n, t = struct.unpack('>I4s', b[pos:pos + 8]); d = b[pos + 8:pos + 8 + n]
    if t == b'IHDR': hdr = struct.unpack('>IIBBBBB', d)
    elif t == b'IDAT': idat += d
    pos += 12 + n
w, h, depth, ctype = hdr[:4]
ch = {2: 3, 6: 4}[ctype]
raw = np.frombuffer(zlib.decompress(idat), np.uint8).reshape(h, w * ch + 1)
# Count distinct row filters only to sanity check; estimate content from unfiltered rows
# (filter type 0) and from the raw byte spread: a blank page compresses to one value.
spread = raw[:, 1:].std()
distinct = len(np.unique(raw[:, 1:]))
print('%dx%d, byte spread %.1f, %d distinct values' % (w, h, spread, distinct))
sys.exit(0 if spread > 5 and distinct > 50 else 1)
EOF
); then pass "report screenshot non-blank ($msg)"; else fail "report screenshot non-blank" "${msg:-no screenshot} $(tail -c 300 "$T/chrome.err")"; fi

run_chrome --dump-dom "file://$H" >"$T/dom.html" 2>"$T/chrome2.err"
nimg=$(grep -o '<img ' "$T/dom.html" | wc -l)
nsvg=$(grep -o '<svg' "$T/dom.html" | wc -l)
if [ "$nimg" -ge 13 ] && [ "$nsvg" -eq 5 ]; then pass "report DOM has thumbnails and plots ($nimg images, $nsvg plots)"
else fail "report DOM has thumbnails and plots" "$nimg images, $nsvg plots"; fi
if grep -E 'CONSOLE|Uncaught|Content Security Policy|Refused to' "$T/chrome.err" "$T/chrome2.err" >"$T/console"; then
    fail "report no console errors" "$(head -c 300 "$T/console")"
else pass "report no console errors"; fi
if grep -E 'net::|ERR_NAME_NOT_RESOLVED|https?://' "$T/chrome.err" "$T/chrome2.err" | grep -v 'file://' >"$T/net"; then
    fail "report no network requests" "$(head -c 300 "$T/net")"
else pass "report no network requests"; fi
