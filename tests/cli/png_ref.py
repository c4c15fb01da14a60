# SPDX-License-Identifier: MIT
"""An independent PNG reader for the end-to-end tests (numpy and the standard library
only), so expectations do not depend on sinew's own decoder. Follows the PNG
specification (ISO/IEC 15948, W3C PNG 2nd edition): chunks, zlib stream, the five
per-row filters (section 9) with the Paeth predictor. Reads 8-bit gray images, not
interlaced: the masks, labels and occlusion maps sinew and `sinew synth` write."""
import struct
import zlib

import numpy as np


def read_gray8(path):
    data = open(path, 'rb').read()
    assert data[:8] == b'\x89PNG\r\n\x1a\n', path + ': not a PNG'
    pos, idat, w, h = 8, b'', 0, 0
    while pos < len(data):
        n, = struct.unpack('>I', data[pos:pos + 4])
        typ, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        if typ == b'IHDR':
            w, h, bd, ct, _, _, il = struct.unpack('>IIBBBBB', body)
            assert bd == 8 and ct == 0 and il == 0, path + ': expected 8-bit gray, not interlaced'
        elif typ == b'IDAT':
            idat += body
        pos += 12 + n
    raw = zlib.decompress(idat)
    out = np.zeros((h, w), np.uint8)
    prev = np.zeros(w, np.int32)
    for y in range(h):
        f = raw[y * (w + 1)]
        row = np.frombuffer(raw[y * (w + 1) + 1:(y + 1) * (w + 1)], np.uint8).astype(np.int32)
        if f == 0:
            cur = row
        elif f == 2:
            cur = (row + prev) & 255
        else:  # Sub, Average, Paeth depend on the left neighbour: pixel by pixel
            cur = np.zeros(w, np.int32)
            for x in range(w):
                a = cur[x - 1] if x else 0
                b, c = prev[x], (prev[x - 1] if x else 0)
                if f == 1:
                    v = a
                elif f == 3:
                    v = (a + b) // 2
                else:
                    pa, pb, pc = abs(b - c), abs(a - c), abs(a + b - 2 * c)
                    v = a if pa <= pb and pa <= pc else b if pb <= pc else c
                cur[x] = (row[x] + v) & 255
        out[y] = cur
        prev = cur
    return out
