# SPDX-License-Identifier: MIT
# Helpers for demo/run and tests/cli/test_synth.sh (python3 + numpy only): read the
# demo scene's files and score estimated flow against its ground truth.
#   python3 demo/truth.py summary SCENE            how far things move, zero-flow EPE
#   python3 demo/truth.py epe SCENE PAIR EST.flo   end-point error of an estimate for
#                                                  pair number PAIR of sequence.json
# EPE = mean Euclidean distance between estimated and true flow vectors (Baker et al.,
# IJCV 2011), over all pixels with known truth, and split by the exact occlusion mask.
import json
import struct
import sys
import zlib

import numpy as np


def read_flo(path):
    d = open(path, 'rb').read()
    if d[:4] != b'PIEH':
        raise ValueError(path + ': not a .flo file')
    w, h = struct.unpack('<ii', d[4:12])
    f = np.frombuffer(d[12:12 + 8 * w * h], '<f4').reshape(h, w, 2).astype(np.float64)
    f[np.abs(f) > 1e9] = np.nan  # the format's "unknown" code
    return f


def read_png(path):
    """Decode a non-interlaced 8- or 16-bit gray or RGB PNG (what sinew writes) into an
    H x W x C float64 array of raw sample values. Pure Python + zlib: fine for masks and
    small images."""
    data = open(path, 'rb').read()
    if data[:8] != b'\x89PNG\r\n\x1a\n':
        raise ValueError(path + ': not a PNG file')
    pos, idat = 8, b''
    while pos < len(data):
        n, kind = struct.unpack('>I4s', data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b'IHDR':
            w, h, depth, ctype, _, _, interlace = struct.unpack('>IIBBBBB', body)
            if depth not in (8, 16) or ctype not in (0, 2) or interlace:
                raise ValueError(path + ': unsupported PNG variant')
        elif kind == b'IDAT':
            idat += body
        pos += 12 + n
    ch = 1 if ctype == 0 else 3
    bpp = ch * depth // 8
    stride = w * bpp
    raw = zlib.decompress(idat)
    out = bytearray(h * stride)
    prev = bytearray(stride)
    for y in range(h):
        f = raw[y * (stride + 1)]
        line = raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)]
        cur = bytearray(stride)
        for i in range(stride):
            a = cur[i - bpp] if i >= bpp else 0
            b = prev[i]
            c = prev[i - bpp] if i >= bpp else 0
            if f == 0:
                p = 0
            elif f == 1:
                p = a
            elif f == 2:
                p = b
            elif f == 3:
                p = (a + b) >> 1
            else:
                pa, pb, pc = abs(b - c), abs(a - c), abs(a + b - 2 * c)
                p = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
            cur[i] = (line[i] + p) & 255
        out[y * stride:(y + 1) * stride] = cur
        prev = cur
    dtype = np.uint8 if depth == 8 else np.dtype('>u2')
    return np.frombuffer(bytes(out), dtype).reshape(h, w, ch).astype(np.float64)


def main():
    cmd, root = sys.argv[1], sys.argv[2]
    seq = json.load(open(root + '/sequence.json'))
    if cmd == 'summary':
        for p in seq['pairs'][:3]:
            f = read_flo(root + '/' + p['flow_forward'])
            m = np.hypot(f[..., 0], f[..., 1])
            m = m[np.isfinite(m)]
            occ = read_png(root + '/' + p['occlusion_forward'])[..., 0]
            sf = np.load(root + '/' + p['scene_flow'])
            s = np.linalg.norm(sf, axis=-1)
            s = s[np.isfinite(s)]
            print('truth %d->%d: |flow| mean %.2f px (= zero-flow EPE), max %.1f px; '
                  'occluded %.1f%%; |scene flow| mean %.1f mm'
                  % (p['from'], p['to'], m.mean(), m.max(), 100.0 * (occ > 0).mean(),
                     1000 * s.mean()))
    elif cmd == 'epe':
        p = seq['pairs'][int(sys.argv[3])]
        gt = read_flo(root + '/' + p['flow_forward'])
        est = read_flo(sys.argv[4])
        occ = read_png(root + '/' + p['occlusion_forward'])[..., 0] > 0
        known = np.isfinite(gt).all(-1)
        e = np.hypot(est[..., 0] - gt[..., 0], est[..., 1] - gt[..., 1])
        e[~np.isfinite(e) & known] = np.inf  # an estimate with holes counts as wrong
        def mean(mask):
            return float(e[mask].mean()) if mask.any() else float('nan')
        print('pair %d->%d: EPE all %.3f px, visible %.3f px, occluded %.3f px (%.1f%% of pixels)'
              % (p['from'], p['to'], mean(known), mean(known & ~occ), mean(known & occ),
                 100.0 * (known & occ).mean()))
    else:
        raise SystemExit('usage: truth.py summary SCENE | epe SCENE PAIR EST.flo')


if __name__ == '__main__':
    main()
