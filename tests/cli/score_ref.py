# SPDX-License-Identifier: MIT
"""Independent numpy reference for tests/cli/test_score.sh.

Builds miniature dataset folders (Middlebury, MPI-Sintel, KITTI, FlyingChairs, list
file) with perturbed estimates, computes the expected scores with numpy, and compares
them with the JSON printed by `sinew score`. Formula sources:
  EE  = |est - gt|                         Baker et al., IJCV 92(1) 2011
  AE  = angle between (u,v,1) and (ug,vg,1) Barron, Fleet, Beauchemin, IJCV 12(1) 1994
  Rx  = % EE > x                            Baker et al. 2011 (robustness statistics)
  Fl  = EE > 3 and EE / |gt| > 0.05         KITTI 2015 devkit (Menze & Geiger, CVPR 2015)
  AUSE, sparsification                      Ilg et al., ECCV 2018, discretised as pinned
                                            in flow/metrics.h / docs/methods.md
File formats: .flo (Middlebury flow-code README: "PIEH", w, h, float32 u,v; unknown
> 1e9), KITTI flow PNG (devkit readme: 16-bit RGB, (v - 2^15)/64, B = valid), PNG
(ISO/IEC 15948), binary PPM (netpbm). Only numpy and the standard library are used.
"""
import json
import os
import struct
import sys
import zlib

import numpy as np

# ---- writers -------------------------------------------------------------------------


def write_flo(path, flow):
    """flow: H x W x 2 float; NaN written as the unknown code 1e10."""
    f = np.where(np.isfinite(flow), flow, 1e10).astype('<f4')
    h, w = f.shape[:2]
    os.makedirs(os.path.dirname(path) or '.', exist_ok=True)
    with open(path, 'wb') as fh:
        fh.write(b'PIEH' + struct.pack('<ii', w, h) + f.tobytes())


def read_flo(path):
    with open(path, 'rb') as fh:
        data = fh.read()
    assert data[:4] == b'PIEH'
    w, h = struct.unpack('<ii', data[4:12])
    f = np.frombuffer(data, '<f4', count=w * h * 2, offset=12).reshape(h, w, 2).astype(np.float64)
    f[(np.abs(f) > 1e9).any(axis=2)] = np.nan
    return f


def write_png(path, img, bits=8):
    """img: H x W (gray) or H x W x C (C = 3 RGB); bits 8 or 16."""
    a = np.asarray(img)
    if a.ndim == 2:
        a = a[:, :, None]
    h, w, c = a.shape
    ctype = {1: 0, 3: 2, 4: 6}[c]
    dt = '>u2' if bits == 16 else 'u1'
    raw = b''.join(b'\x00' + a[y].astype(dt).tobytes() for y in range(h))

    def chunk(tag, body):
        return struct.pack('>I', len(body)) + tag + body + struct.pack('>I', zlib.crc32(tag + body))

    os.makedirs(os.path.dirname(path) or '.', exist_ok=True)
    with open(path, 'wb') as fh:
        fh.write(b'\x89PNG\r\n\x1a\n')
        fh.write(chunk(b'IHDR', struct.pack('>IIBBBBB', w, h, bits, ctype, 0, 0, 0)))
        fh.write(chunk(b'IDAT', zlib.compress(raw)))
        fh.write(chunk(b'IEND', b''))


def write_ppm(path, rgb):
    h, w = rgb.shape[:2]
    with open(path, 'wb') as fh:
        fh.write(b'P6\n%d %d\n255\n' % (w, h) + rgb.astype('u1').tobytes())


def kitti_encode(flow):
    """KITTI flow PNG values; returns (uint16 H x W x 3, the decoded float flow)."""
    valid = np.isfinite(flow).all(axis=2)
    q = np.where(valid[..., None], np.round(np.nan_to_num(flow) * 64.0) + 32768, 32768)
    q = np.clip(q, 0, 65535).astype(np.uint16)
    out = np.dstack([q[..., 0], q[..., 1], valid.astype(np.uint16)])
    dec = (q.astype(np.float64) - 32768.0) / 64.0
    dec[~valid] = np.nan
    return out, dec


def write_kitti(path, flow):
    img, dec = kitti_encode(flow)
    write_png(path, img, 16)
    return dec


# ---- reference metrics --------------------------------------------------------------


def region_stats(est, gt, sel):
    """Sums over pixels in `sel` (bool) with known gt; scored where est known too."""
    gk = sel & np.isfinite(gt).all(axis=2)
    sc = gk & np.isfinite(est).all(axis=2)
    e, g = est[sc].astype(np.float64), gt[sc].astype(np.float64)
    d = e - g
    ee = np.sqrt((d ** 2).sum(axis=1))
    num = 1.0 + (e * g).sum(axis=1)
    den = np.sqrt(1.0 + (e ** 2).sum(axis=1)) * np.sqrt(1.0 + (g ** 2).sum(axis=1))
    ae = np.degrees(np.arccos(np.clip(num / den, -1.0, 1.0)))
    gm = np.sqrt((g ** 2).sum(axis=1))
    return {
        'n_gt': int(gk.sum()), 'n_valid': int(sc.sum()), 'sum_epe': float(ee.sum()),
        'sum_ae': float(ae.sum()), 'r05': int((ee > 0.5).sum()), 'r1': int((ee > 1).sum()),
        'r3': int((ee > 3).sum()), 'r5': int((ee > 5).sum()),
        'fl': int(((ee > 3.0) & (ee > 0.05 * gm)).sum()),
    }


def summarize(s):
    n = s['n_valid']
    nan = float('nan')
    pct = (lambda k: 100.0 * s[k] / n) if n else (lambda k: nan)
    return {
        'epe': s['sum_epe'] / n if n else nan, 'aae_deg': s['sum_ae'] / n if n else nan,
        'r05_pct': pct('r05'), 'r1_pct': pct('r1'), 'r3_pct': pct('r3'), 'r5_pct': pct('r5'),
        'fl_all_pct': pct('fl'), 'n_valid': n, 'n_gt': s['n_gt'],
        'density_pct': 100.0 * n / s['n_gt'] if s['n_gt'] else nan,
    }


def pair_expect(est, gt, evalmask=None, occ=None):
    """Per-pair sums for all / noc / occ (occ: bool, True = occluded)."""
    sel = np.ones(gt.shape[:2], bool) if evalmask is None else evalmask
    out = {'all': region_stats(est, gt, sel)}
    if occ is not None:
        out['noc'] = region_stats(est, gt, sel & ~occ)
        out['occ'] = region_stats(est, gt, sel & occ)
    return out


def expect_layout(pairs):
    """pairs: list of (id, sums). Returns the expected JSON skeleton."""
    exp = {'pairs': [], 'summary': {}}
    for pid, s in pairs:
        row = summarize(s['all'])
        row['id'] = pid
        for k in ('noc', 'occ'):
            if k in s:
                row[k] = summarize(s[k])
        exp['pairs'].append(row)
    for name in ('mean-of-pairs', 'pooled-pixels'):
        summ = {}
        for reg in ('all', 'noc', 'occ'):
            have = [s[reg] for _, s in pairs if reg in s]
            if not have:
                continue
            if name == 'pooled-pixels':
                tot = {k: sum(h[k] for h in have) for k in have[0]}
                val = summarize(tot)
            else:
                per = [summarize(h) for h in have if h['n_valid'] > 0]
                keys = ['epe', 'aae_deg', 'r05_pct', 'r1_pct', 'r3_pct', 'r5_pct', 'fl_all_pct',
                        'density_pct']
                val = {k: float(np.mean([p[k] for p in per])) for k in keys}
                val['n_valid'] = sum(h['n_valid'] for h in have)
                val['n_gt'] = sum(h['n_gt'] for h in have)
            if reg == 'all':
                summ.update(val)
            else:
                summ[reg] = val
        exp['summary'][name] = summ
    return exp


def sparsification(unc, err, steps=100):
    """Pinned definition (flow/metrics.h): most uncertain first, ties by index."""
    n = len(err)
    idx = np.arange(n)

    def curve(order_key):
        order = np.lexsort((idx, -order_key))  # key descending, index ascending
        e = err[order].astype(np.float64)
        full = e.mean()
        r = (np.arange(steps) * n) // steps
        c = np.array([e[k:].mean() for k in r])
        return c / full if full > 0 else np.zeros(steps)

    c, o = curve(unc.astype(np.float64)), curve(err.astype(np.float64))
    d = c - o
    return float(((d[:-1] + d[1:]) / 2.0).sum() / steps)


# ---- comparison ---------------------------------------------------------------------


def close(a, b, rel=1e-9):
    if a is None or b is None or (isinstance(b, float) and np.isnan(b)):
        return (a is None or (isinstance(a, float) and np.isnan(a))) and \
            (b is None or (isinstance(b, float) and np.isnan(b)))
    return abs(a - b) <= rel * max(1.0, abs(b))


def compare(got, exp, where, errors):
    for k, v in exp.items():
        if k == 'id':
            if got.get('id') != v:
                errors.append('%s: id %r != %r' % (where, got.get('id'), v))
        elif isinstance(v, dict):
            if k not in got:
                errors.append('%s: missing %s' % (where, k))
            else:
                compare(got[k], v, where + '.' + k, errors)
        elif k not in got:
            errors.append('%s: missing key %s' % (where, k))
        elif not close(got[k], v):
            errors.append('%s.%s: sinew %r, numpy %r' % (where, k, got[k], v))


def report(name, errors):
    if errors:
        print('FAIL: %s: %s' % (name, '; '.join(errors[:4])))
    else:
        print('PASS: %s' % name)


# ---- miniature folders --------------------------------------------------------------


def perturb(gt, rng, holes=True):
    est = gt + rng.normal(0.0, 1.5, gt.shape)
    big = rng.random(gt.shape[:2]) < 0.1
    est[big] += rng.normal(0.0, 8.0, (int(big.sum()), 2))
    if holes:
        est[rng.random(gt.shape[:2]) < 0.05] = np.nan
    return est


def rand_flow(rng, h, w, scale=6.0):
    return rng.normal(0.0, scale, (h, w, 2))


def gray(rng, h, w):
    return rng.integers(0, 256, (h, w))


def build(root):
    rng = np.random.default_rng(20240611)
    exp = {}
    est_root = os.path.join(root, 'est')

    # Middlebury, official layout: other-gt-flow/SEQ/flow10.flo, other-data/SEQ/frame1x.png
    pairs = []
    for seq, (h, w) in (('Alpha', (7, 9)), ('Beta', (5, 6))):
        gt = rand_flow(rng, h, w)
        gt[0, :3] = np.nan  # unknown ground truth (written as 1e10)
        write_flo('%s/middlebury/other-gt-flow/%s/flow10.flo' % (root, seq), gt)
        for fr in ('frame10', 'frame11'):
            write_png('%s/middlebury/other-data/%s/%s.png' % (root, seq, fr), gray(rng, h, w))
        est = perturb(gt, rng)
        write_flo('%s/middlebury/%s.flo' % (est_root, seq), est)
        pairs.append((seq, pair_expect(read_flo('%s/middlebury/%s.flo' % (est_root, seq)),
                                       read_flo('%s/middlebury/other-gt-flow/%s/flow10.flo'
                                                % (root, seq)))))
    exp['middlebury'] = expect_layout(pairs)

    # MPI-Sintel training: flow/, clean/, occlusions/, invalid/
    pairs = []
    auses = []
    for scene in ('bamboo_x', 'cave_y'):
        for num in (1, 2):
            h, w = 6, 8
            gt = rand_flow(rng, h, w)
            occ = rng.random((h, w)) < 0.3
            inv = rng.random((h, w)) < 0.15
            base = '%s/sintel/training' % root
            write_flo('%s/flow/%s/frame_%04d.flo' % (base, scene, num), gt)
            write_png('%s/occlusions/%s/frame_%04d.png' % (base, scene, num), occ * 255)
            write_png('%s/invalid/%s/frame_%04d.png' % (base, scene, num), inv * 255)
            for fr in (num, num + 1):
                write_png('%s/clean/%s/frame_%04d.png' % (base, scene, fr),
                          rng.integers(0, 256, (h, w, 3)))
            est = perturb(gt, rng)
            ep = '%s/sintel/%s/frame_%04d.flo' % (est_root, scene, num)
            write_flo(ep, est)
            e, g = read_flo(ep), read_flo('%s/flow/%s/frame_%04d.flo' % (base, scene, num))
            pairs.append(('%s/frame_%04d' % (scene, num), pair_expect(e, g, ~inv, occ)))
            # confidence for --confidences: AUSE over scored pixels outside invalid/
            conf = rng.random((h, w)).astype('<f4')
            os.makedirs('%s/conf/sintel/%s' % (root, scene), exist_ok=True)
            np.save('%s/conf/sintel/%s/frame_%04d.npy' % (root, scene, num), conf)
            sc = ~inv & np.isfinite(e).all(axis=2) & np.isfinite(g).all(axis=2)
            err = np.sqrt(((e - g) ** 2).sum(axis=2))[sc].astype('<f4')
            auses.append(sparsification((np.float32(1) - conf)[sc], err))
    exp['sintel'] = expect_layout(pairs)
    withconf = json.loads(json.dumps(exp['sintel']))
    for row, a in zip(withconf['pairs'], auses):
        row['ause'] = a
    withconf['summary']['mean-of-pairs']['ause'] = float(np.mean(auses))
    exp['sintel_conf'] = withconf

    # KITTI 2015 training: flow_occ/, flow_noc/, image_2/ (16-bit RGB flow PNGs)
    pairs = []
    for k in range(2):
        h, w = 5, 7
        gt = rand_flow(rng, h, w, 20.0)
        gt[rng.random((h, w)) < 0.2] = np.nan  # sparse LiDAR ground truth
        noc = gt.copy()
        occ = (rng.random((h, w)) < 0.3) & np.isfinite(gt).all(axis=2)
        noc[occ] = np.nan
        base = '%s/kitti/training' % root
        g = write_kitti('%s/flow_occ/%06d_10.png' % (base, k), gt)
        write_kitti('%s/flow_noc/%06d_10.png' % (base, k), noc)
        for fr in (10, 11):
            write_png('%s/image_2/%06d_%d.png' % (base, k, fr), rng.integers(0, 256, (h, w, 3)))
        e = write_kitti('%s/kitti/%06d_10.png' % (est_root, k), perturb(gt, rng))
        pairs.append(('%06d_10' % k, pair_expect(e, g, None, occ)))
    exp['kitti'] = expect_layout(pairs)

    # FlyingChairs, both naming patterns
    for sub, names in (('chairs', ('%05d_flow.flo', '%05d_img1.ppm', '%05d_img2.ppm')),
                       ('chairs2', ('%07d-gt.flo', '%07d-img0.ppm', '%07d-img1.ppm'))):
        pairs = []
        for k in (1, 2):
            h, w = 4, 5
            gt = rand_flow(rng, h, w, 10.0)
            write_flo('%s/%s/%s' % (root, sub, names[0] % k), gt)
            write_ppm('%s/%s/%s' % (root, sub, names[1] % k), rng.integers(0, 256, (h, w, 3)))
            write_ppm('%s/%s/%s' % (root, sub, names[2] % k), rng.integers(0, 256, (h, w, 3)))
            pid = (names[0] % k).split('_')[0].split('-')[0]
            est = perturb(gt, rng, holes=False)
            os.makedirs('%s/%s' % (est_root, sub), exist_ok=True)
            np.save('%s/%s/%s.npy' % (est_root, sub, pid), est.astype('<f4'))
            pairs.append((pid, pair_expect(est.astype('<f4').astype(np.float64),
                                           read_flo('%s/%s/%s' % (root, sub, names[0] % k)))))
        exp[sub] = expect_layout(pairs)
    # list file: paths relative to the list, id = gt path without extension
    pairs = []
    lines = []
    for name in ('one/gt', 'two/gt'):
        h, w = 3, 4
        gt = rand_flow(rng, h, w)
        write_flo('%s/listdata/%s.flo' % (root, name), gt)
        lines.append('%s_a.png %s_b.png %s.flo  # pair %s' % (name, name, name, name))
        est = perturb(gt, rng)
        write_flo('%s/list/%s.flo' % (est_root, name), est)
        pairs.append((name, pair_expect(read_flo('%s/list/%s.flo' % (est_root, name)),
                                        read_flo('%s/listdata/%s.flo' % (root, name)))))
    with open('%s/listdata/pairs.txt' % root, 'w') as fh:
        fh.write('# frame1 frame2 gt\n\n' + '\n'.join(lines) + '\n')
    exp['list'] = expect_layout(pairs)
    with open('%s/expected.json' % root, 'w') as fh:
        json.dump(exp, fh)


def single(root):
    """One pair with occlusion, validity, our mask and confidence."""
    rng = np.random.default_rng(7)
    h, w = 12, 10
    gt = rand_flow(rng, h, w)
    gt[1, 1] = np.nan
    est = perturb(gt, rng)
    occ = rng.random((h, w)) < 0.25
    valid = rng.random((h, w)) < 0.9
    ours = rng.integers(0, 8, (h, w))  # bits: 1 FB, 2 outside, 4 boundary
    conf = rng.random((h, w)).astype('<f4')
    write_flo(root + '/est.flo', est)
    write_flo(root + '/gt.flo', gt)
    write_png(root + '/occ.png', occ * 255)
    write_png(root + '/valid.png', valid * 255)
    write_png(root + '/ours.png', ours)
    np.save(root + '/conf.npy', conf)
    e, g = read_flo(root + '/est.flo'), read_flo(root + '/gt.flo')
    s = pair_expect(e, g, valid, occ)
    exp = summarize(s['all'])
    exp['noc'] = summarize(s['noc'])
    exp['occ'] = summarize(s['occ'])
    pred = (ours & 3) != 0
    tp = int((pred & occ & valid).sum())
    fp = int((pred & ~occ & valid).sum())
    fn = int((~pred & occ & valid).sum())
    p, r = tp / (tp + fp), tp / (tp + fn)
    exp['occlusion_mask'] = {'tp': tp, 'fp': fp, 'fn': fn, 'precision': p, 'recall': r,
                             'f1': 2 * p * r / (p + r)}
    sc = valid & np.isfinite(e).all(axis=2) & np.isfinite(g).all(axis=2)
    err = np.sqrt(((e - g) ** 2).sum(axis=2))[sc].astype('<f4')
    unc = (np.float32(1) - conf)[sc]
    exp['sparsification'] = {'n': int(sc.sum()), 'ause': sparsification(unc, err)}
    with open(root + '/expected_single.json', 'w') as fh:
        json.dump(exp, fh)


def preset_data(root):
    """Two 64x48 pairs for --preset: a smooth random texture shifted by whole pixels, so
    the ground truth is a constant flow (frame0(x) = frame1(x + flow)). Listed in
    ROOT/pairs.txt (list layout)."""
    rng = np.random.default_rng(5)
    lines = []
    for k, (du, dv) in enumerate(((2, 1), (-1, 3))):
        h, w, pad = 48, 64, 8
        big = rng.random((h + 2 * pad, w + 2 * pad))
        for _ in range(3):  # box blur: smooth texture the estimator can track
            big = (big + np.roll(big, 1, 0) + np.roll(big, -1, 0) + np.roll(big, 1, 1) +
                   np.roll(big, -1, 1)) / 5.0
        big = (big - big.min()) / (big.max() - big.min()) * 255.0
        f0 = big[pad:pad + h, pad:pad + w]
        f1 = big[pad - dv:pad - dv + h, pad - du:pad - du + w]  # f1(x + d) = f0(x)
        write_png('%s/p%d/a.png' % (root, k), np.round(f0))
        write_png('%s/p%d/b.png' % (root, k), np.round(f1))
        gt = np.zeros((h, w, 2))
        gt[..., 0], gt[..., 1] = du, dv
        write_flo('%s/p%d/gt.flo' % (root, k), gt)
        lines.append('p%d/a.png p%d/b.png p%d/gt.flo' % (k, k, k))
    with open(root + '/pairs.txt', 'w') as fh:
        fh.write('\n'.join(lines) + '\n')


def same_scores(name, a_path, b_path):
    """Two sinew JSON outputs carry identical per-pair numbers."""
    with open(a_path) as fh:
        a = json.load(fh)
    with open(b_path) as fh:
        b = json.load(fh)
    errors = []
    for pa, pb in zip(a['pairs'], b['pairs']):
        for k in ('epe', 'aae_deg', 'r1_pct', 'n_valid'):
            if pa[k] != pb[k]:
                errors.append('%s %s: %r vs %r' % (pa['id'], k, pa[k], pb[k]))
        if not (isinstance(pa.get('runtime_s'), float) or pa.get('runtime_s') == 0) \
                or pa['runtime_s'] < 0:
            errors.append('%s: runtime_s missing' % pa['id'])
    if len(a['pairs']) != 2 or len(b['pairs']) != 2:
        errors.append('expected 2 pairs')
    report(name, errors)


def middlebury_real(data, out):
    """Perturb the published Middlebury ground truth, write estimates, expected scores."""
    rng = np.random.default_rng(11)
    pairs = []
    for seq in sorted(os.listdir(data)):
        p = os.path.join(data, seq, 'flow10.flo')
        if not os.path.isfile(p):
            continue
        gt = read_flo(p)
        est = gt + rng.normal(0.0, 0.6, gt.shape)
        est[rng.random(gt.shape[:2]) < 0.02] = np.nan
        write_flo('%s/%s.flo' % (out, seq), est)
        pairs.append((seq, pair_expect(read_flo('%s/%s.flo' % (out, seq)), gt)))
    with open(out + '/expected.json', 'w') as fh:
        json.dump(expect_layout(pairs), fh)


def check(name, expected, got_path, key=None):
    with open(expected) as fh:
        exp = json.load(fh)
    if key:
        exp = exp[key]
    try:
        with open(got_path) as fh:
            got = json.load(fh)
    except (OSError, ValueError) as e:
        report(name, ['cannot read sinew JSON: %s' % e])
        return
    errors = []
    if 'pairs' in exp:
        if len(got.get('pairs', [])) != len(exp['pairs']):
            errors.append('%d pairs, expected %d' % (len(got.get('pairs', [])), len(exp['pairs'])))
        else:
            for i, (g, e) in enumerate(zip(got['pairs'], exp['pairs'])):
                compare(g, e, 'pairs[%d]' % i, errors)
        compare(got.get('summary', {}), exp['summary'], 'summary', errors)
    else:
        compare(got, exp, 'pair', errors)
    report(name, errors)


def csv_matches_json(name, csv_path, json_path):
    """The CSV summary rows carry the same numbers as the JSON summary."""
    import csv
    with open(json_path) as fh:
        js = json.load(fh)
    with open(csv_path) as fh:
        rows = list(csv.DictReader(fh))
    errors = []
    by = {(r['pair'], r['averaging']): r for r in rows}
    for p in js['pairs']:
        r = by.get((p['id'], 'per-pair'))
        if r is None:
            errors.append('no CSV row for %s' % p['id'])
            continue
        for k in ('epe', 'aae_deg', 'r1_pct', 'fl_all_pct', 'density_pct'):
            if not close(float(r[k]), p[k], 1e-8):
                errors.append('%s %s: csv %s json %r' % (p['id'], k, r[k], p[k]))
    for avg in ('mean-of-pairs', 'pooled-pixels'):
        r = by.get(('summary', avg))
        if r is None:
            errors.append('no CSV summary row %s' % avg)
            continue
        if not close(float(r['epe']), js['summary'][avg]['epe'], 1e-8):
            errors.append('%s epe: csv %s json %r' % (avg, r['epe'], js['summary'][avg]['epe']))
    report(name, errors)


if __name__ == '__main__':
    cmd = sys.argv[1]
    if cmd == 'build':
        build(sys.argv[2])
    elif cmd == 'single':
        single(sys.argv[2])
    elif cmd == 'preset':
        preset_data(sys.argv[2])
    elif cmd == 'same':
        same_scores(sys.argv[2], sys.argv[3], sys.argv[4])
    elif cmd == 'middlebury':
        middlebury_real(sys.argv[2], sys.argv[3])
    elif cmd == 'check':
        check(sys.argv[2], sys.argv[3], sys.argv[4], sys.argv[5] if len(sys.argv) > 5 else None)
    elif cmd == 'csv':
        csv_matches_json(sys.argv[2], sys.argv[3], sys.argv[4])
    else:
        sys.exit('unknown command ' + cmd)
