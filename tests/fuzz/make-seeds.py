#!/usr/bin/env python3
# SPDX-License-Identifier: MIT
# Regenerate the small seed inputs in tests/fuzz/corpus/ (standard library only).
# JPEG seeds are not produced here (no encoder in the standard library); they were
# written once with TurboJPEG's tjCompress2 and are kept as they are.
import os, struct, zlib

root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "corpus")

def put(target, name, data):
    d = os.path.join(root, target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data)

def png(w, h, bitdepth, colortype, rows, plte=None, trns=None):
    def chunk(t, b):
        return struct.pack(">I", len(b)) + t + b + struct.pack(">I", zlib.crc32(t + b) & 0xffffffff)
    raw = b"".join(b"\0" + r for r in rows)
    out = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, bitdepth, colortype, 0, 0, 0))
    if plte: out += chunk(b"PLTE", plte)
    if trns: out += chunk(b"tRNS", trns)
    return out + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b"")

w, h = 4, 3
put("png", "gray8.png", png(w, h, 8, 0, [bytes(range(y * 4, y * 4 + 4)) for y in range(h)]))
put("png", "gray16.png", png(w, h, 16, 0, [struct.pack(">4H", *(1000 * y + x for x in range(4))) for y in range(h)]))
def px(y, chans):
    return bytes(c for x in range(4) for c in chans(x, y))
put("png", "rgb8.png", png(w, h, 8, 2, [px(y, lambda x, y: (x * 60, y * 80, 128)) for y in range(h)]))
put("png", "rgba8.png", png(w, h, 8, 6, [px(y, lambda x, y: (x * 60, y * 80, 10, 255)) for y in range(h)]))
put("png", "graya8.png", png(w, h, 8, 4, [px(y, lambda x, y: (x * 60, 200)) for y in range(h)]))
put("png", "rgb16.png", png(w, h, 16, 2, [struct.pack(">12H", *range(12)) for y in range(h)]))
put("png", "palette4.png", png(w, h, 4, 3, [bytes([0x01, 0x23]) for y in range(h)],
                                 plte=bytes([0, 0, 0, 255, 0, 0, 0, 255, 0, 0, 0, 255]), trns=bytes([255, 128])))
put("png", "gray1.png", png(9, 2, 1, 0, [bytes([0b10101010, 0b10000000]) for y in range(2)]))

# KITTI flow PNG: 16-bit RGB, (value - 2^15)/64, B = valid.
rows = []
for y in range(h):
    vals = []
    for x in range(w):
        vals += [32768 + 64 * x, 32768 - 32 * y, 1 if (x + y) % 3 else 0]
    rows.append(struct.pack(">%dH" % len(vals), *vals))
put("kitti", "flow.png", png(w, h, 16, 2, rows))
put("kitti", "gray.png", png(w, h, 8, 0, [bytes(4)] * h))

# PGM/PPM.
put("pnm", "gray8.pgm", b"P5\n# comment\n4 3\n255\n" + bytes(range(12)))
put("pnm", "gray16.pgm", b"P5 4 3 65535\n" + struct.pack(">12H", *range(0, 12000, 1000)))
put("pnm", "rgb8.ppm", b"P6\n4 3\n255\n" + bytes(range(36)))
put("pnm", "rgb16.ppm", b"P6\n2 1\n1023\n" + struct.pack(">6H", 1, 2, 3, 1000, 1023, 0))

# .flo: "PIEH", w, h, then (u, v) float32 little-endian; 1e10 = unknown.
vals = []
for y in range(h):
    for x in range(w):
        vals += [0.5 * x, -0.25 * y] if (x, y) != (1, 1) else [1e10, 1e10]
put("flo", "flow.flo", b"PIEH" + struct.pack("<ii", w, h) + struct.pack("<%df" % len(vals), *vals))
put("flo", "tiny.flo", b"PIEH" + struct.pack("<ii", 1, 1) + struct.pack("<ff", 0.0, 0.0))

# PFM: "PF" 3 channels / "Pf" 1 channel; negative scale = little endian; rows bottom to top.
put("pfm", "flow_le.pfm", b"PF\n4 3\n-1.0\n" + struct.pack("<36f", *[float(i) for i in range(36)]))
put("pfm", "flow_be.pfm", b"PF\n4 3\n1.0\n" + struct.pack(">36f", *[float(i) for i in range(36)]))
put("pfm", "depth_le.pfm", b"Pf\n4 3\n-1.0\n" + struct.pack("<12f", *[1.0 + i for i in range(12)]))

# .npy versions 1.0 and 2.0 (NumPy format specification).
def npy(descr, shape, payload, version=1):
    hdr = "{'descr': '%s', 'fortran_order': False, 'shape': (%s), }" % (
        descr, ", ".join(str(s) for s in shape) + ("," if len(shape) == 1 else ""))
    pre = 10 if version == 1 else 12
    pad = 64 - (pre + len(hdr) + 1) % 64
    hdr = hdr + " " * pad + "\n"
    ln = struct.pack("<H", len(hdr)) if version == 1 else struct.pack("<I", len(hdr))
    return b"\x93NUMPY" + bytes([version, 0]) + ln + hdr.encode() + payload

put("npy", "f4.npy", npy("<f4", (3, 4, 2), struct.pack("<24f", *[0.25 * i for i in range(24)])))
put("npy", "f2_v2.npy", npy("<f2", (3, 4, 2), struct.pack("<24e", *[0.5 * i for i in range(24)]), 2))
put("npy", "f8_be.npy", npy(">f8", (3, 4), struct.pack(">12d", *[float(i) for i in range(12)])))
put("npy", "nan.npy", npy("<f4", (1, 2, 2), struct.pack("<4f", float("nan"), 1.0, 2.0, float("inf"))))

# Intrinsics: JSON object or 3x3 matrix.
put("intrinsics", "k.json", b'{"fx": 585, "fy": 585, "cx": 320, "cy": 240, "width": 640, "height": 480, "k1": 0.1}')
put("intrinsics", "k.txt", b"# camera\n585 0 320\n0 585 240\n0 0 1\n")
put("intrinsics", "k_brackets.txt", b"[[525.0, 0, 319.5], [0, 525.0, 239.5], [0, 0, 1]]")
