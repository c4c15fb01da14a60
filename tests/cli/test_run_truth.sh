#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew run` scoring each pair against the ground truth its
# sequence.json carries (issue 17): EPE all / visible / occluded, occlusion precision,
# recall and F1, and the 3-D error of the lifted matches, in stats.json and the --report
# table. Expected values are recomputed with numpy from the run's own output files and
# the truth files: EE = |est - gt| (Baker et al., IJCV 2011), F1 = 2PR / (P + R),
# 3-D error = |(X1 - X0) - scene flow| at the match's source pixel; files are read with
# demo/truth.py (.flo and PNG, numpy only). The scene is the invented
# one of `sinew synth`.
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"
OPT="--preset fast --progress plain"
REFDIR="$(cd "$(dirname "$0")/../../demo" && pwd)"

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "run truth scores" "python3-numpy missing"
    exit 0
fi
"$B" synth -o "$T/sc" --frames 4 --size 160x120 >/dev/null 2>"$T/err" || {
    fail "synth scene" "$(cat "$T/err")"
    exit 0
}
if "$B" run "$T/sc/sequence.json" -o "$T/r" $OPT --report >"$T/out" 2>"$T/err"; then
    pass "run with ground truth exits 0"
else
    fail "run with ground truth exits 0" "$(cat "$T/err")"
fi
if "$PYTHON" - "$T/r" "$T/sc" "$REFDIR" >"$T/py.out" 2>&1 <<'PY'; then
import json, os, sys
import numpy as np
run, sc, ref = sys.argv[1:4]
sys.path.insert(0, ref)
import truth
seq = json.load(open(os.path.join(sc, 'sequence.json')))
def close(a, b, what):
    assert abs(a - b) <= 1e-6 * max(1.0, abs(b)), (what, a, b)
n = 0
for t in seq['pairs']:
    name = '%06d-%06d' % (t['from'], t['to'])
    d = os.path.join(run, 'pairs', name)
    st = json.load(open(os.path.join(d, 'stats.json')))['truth']
    est = truth.read_flo(os.path.join(d, 'forward.flo'))
    gt = truth.read_flo(os.path.join(sc, t['flow_forward']))
    occ = truth.read_png(os.path.join(sc, t['occlusion_forward']))[..., 0].astype(np.uint8) != 0
    known = np.isfinite(gt).all(-1) & np.isfinite(est).all(-1)
    ee = np.hypot(est[..., 0] - gt[..., 0], est[..., 1] - gt[..., 1])
    close(st['epe_all'], ee[known].mean(), name + ' epe_all')
    close(st['epe_noc'], ee[known & ~occ].mean(), name + ' epe_noc')
    close(st['epe_occ'], ee[known & occ].mean(), name + ' epe_occ')
    pred = (truth.read_png(os.path.join(d, 'mask.png'))[..., 0].astype(np.uint8) & 3) != 0
    tp = float((pred & occ).sum()); p = tp / pred.sum(); r = tp / occ.sum()
    close(st['occlusion_precision'], p, name + ' precision')
    close(st['occlusion_recall'], r, name + ' recall')
    close(st['occlusion_f1'], 2 * p * r / (p + r), name + ' F1')
    m = np.load(os.path.join(d, 'matches.npy'))
    c = json.load(open(os.path.join(d, 'matches.json')))['columns']
    sf = np.load(os.path.join(sc, t['scene_flow'])).astype(np.float64)
    u = np.rint(m[:, c.index('u0')]).astype(int); v = np.rint(m[:, c.index('v0')]).astype(int)
    x0 = m[:, [c.index(k) for k in ('X0', 'Y0', 'Z0')]].astype(np.float64)
    x1 = m[:, [c.index(k) for k in ('X1', 'Y1', 'Z1')]].astype(np.float64)
    e3 = 1000 * np.linalg.norm((x1 - x0) - sf[v, u], axis=1)
    e3 = e3[np.isfinite(e3)]
    assert st['match_3d_rows'] == len(e3), (name, st['match_3d_rows'], len(e3))
    close(st['match_3d_error_mm_median'], float(np.median(e3)), name + ' 3-D median')
    close(st['match_3d_error_mm_mean'], float(e3.mean()), name + ' 3-D mean')
    n += 1
assert n == 3, n
print('ok')
PY
    pass "truth scores in stats.json agree with numpy (EPE, occlusion P/R/F1, 3-D error)"
else
    fail "truth scores in stats.json agree with numpy (EPE, occlusion P/R/F1, 3-D error)" "$(tail -3 "$T/py.out")"
fi
if grep -q "EPE px  occ F1  3-D err mm" "$T/out" && [ "$(grep -cE '^00000[0-2]-00000[1-3] .* yes .*[0-9]\.[0-9]* *[0-9]\.[0-9]* *[0-9]*\.[0-9]( +[0-9]+\.[0-9] +[0-9]+\.[0-9]{2})?$' "$T/out")" -eq 3 ]; then
    pass "--report table shows EPE, occlusion F1 and 3-D error per pair"
else
    fail "--report table shows EPE, occlusion F1 and 3-D error per pair" "$(head -5 "$T/out")"
fi
# the report page fills its ground-truth metrics
if grep -q "Endpoint error vs ground truth" "$T/r/report.html"; then
    pass "report.html carries the truth metrics"
else
    fail "report.html carries the truth metrics" "not found"
fi

# a sequence without truth: no columns, no truth keys
"$PYTHON" -c "
import json; j = json.load(open('$T/sc/sequence.json')); j.pop('pairs', None)
json.dump(j, open('$T/sc/notruth.json', 'w'))"
"$B" run "$T/sc/notruth.json" -o "$T/n" $OPT --report >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && ! grep -q "EPE px" "$T/out" && ! grep -q '"truth"' "$T/n/pairs/000000-000001/stats.json" \
    && ! grep -q "Endpoint error vs ground truth" "$T/n/report.html"; then
    pass "no truth: no truth columns or keys"
else
    fail "no truth: no truth columns or keys" "$(head -3 "$T/out")"
fi

# a truth file that cannot be read: a warning naming it, the pair is still done
cp "$T/sc/sequence.json" "$T/sc/seq_bad.json"
printf 'PIEH' >"$T/sc/truth/flow_forward/broken.flo"
"$PYTHON" -c "
import json; j = json.load(open('$T/sc/seq_bad.json'))
j['pairs'][1]['flow_forward'] = 'truth/flow_forward/broken.flo'
json.dump(j, open('$T/sc/seq_bad.json', 'w'))"
"$B" run "$T/sc/seq_bad.json" -o "$T/b" $OPT >"$T/out" 2>"$T/err"
rc=$?
if [ $rc -eq 0 ] && grep -q "warning: ground truth not used: .*broken.flo" "$T/err" \
    && [ -f "$T/b/pairs/000001-000002/done.json" ]; then
    pass "unreadable truth: warning naming it, pair done"
else
    fail "unreadable truth: warning naming it, pair done" "rc $rc: $(head -c 300 "$T/err")"
fi
