# SPDX-License-Identifier: MIT
"""Float maps for the CLI tests, read with the Python standard library only (so the
checks do not rely on sinew's own readers): PFM ("Pf", rows bottom-up as the format
requires) and float32 .npy (format 1.0, C order). Each returns (w, h, rows) with
rows[y][x] and row 0 at the top."""
import struct


def pfm(path):
    f = open(path, 'rb')
    kind = f.readline().strip()
    assert kind == b'Pf', kind
    w, h = map(int, f.readline().split())
    s = float(f.readline())
    n = w * h
    v = struct.unpack(('<' if s < 0 else '>') + 'f' * n, f.read(4 * n))
    return w, h, [v[(h - 1 - y) * w:(h - y) * w] for y in range(h)]


def npy(path):
    b = open(path, 'rb').read()
    n = struct.unpack('<H', b[8:10])[0]
    hdr = b[10:10 + n].decode()
    assert "'<f4'" in hdr, hdr
    h, w = eval(hdr)['shape']
    v = struct.unpack('<' + 'f' * (w * h), b[10 + n:10 + n + 4 * w * h])
    return w, h, [v[y * w:(y + 1) * w] for y in range(h)]
