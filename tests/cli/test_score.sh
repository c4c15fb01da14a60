#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew score`: every layout reader on miniature folders built here,
# one pair with occlusion/validity/our mask/confidence, and the published Middlebury
# ground truth with a perturbed estimate. Expected numbers come from an independent
# numpy implementation of the published formulas (tests/cli/score_ref.py names the
# sources); CSV and JSON must carry the same numbers; bad input gives one line and a
# non-zero exit.
. "$(dirname "$0")/lib.sh"
REF="$(dirname "$0")/score_ref.py"

expect_ok "score --help" "$SINEW_BIN" score --help
if grep -q "not a medical device" "$T/out" && grep -q "averag" "$T/out"; then
    pass "help states the averaging and ends with the notice"
else
    fail "help text" "notice or averaging missing"
fi
expect_error "no arguments is a usage error" - "usage|expected EST GT" "$SINEW_BIN" score
"$SINEW_BIN" score >/dev/null 2>&1
rc=$?
[ $rc -eq 2 ] && pass "usage error exits 2" || fail "usage error exits 2" "exit $rc"
expect_error "unknown layout" - "unknown layout 'foo'" \
    "$SINEW_BIN" score --layout foo --root "$T" --estimates "$T"
expect_error "--mask needs --occ" - "--occ" "$SINEW_BIN" score a.flo b.flo --mask m.png

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "numpy reference checks" "python3-numpy not available at $PYTHON"
    exit 0
fi

# ---- miniature layouts -----------------------------------------------------------------
M="$T/mini"
mkdir -p "$M"
"$PYTHON" "$REF" build "$M" || fail "build miniature folders" "python failed"
for layout in middlebury sintel kitti chairs chairs2 list; do
    case $layout in
    middlebury) root="$M/middlebury"; lay=middlebury ;;
    sintel) root="$M/sintel/training"; lay=sintel ;;
    kitti) root="$M/kitti/training"; lay=kitti ;;
    chairs | chairs2) root="$M/$layout"; lay=chairs ;;
    list) root="$M/listdata/pairs.txt"; lay=list ;;
    esac
    if "$SINEW_BIN" score --layout "$lay" --root "$root" --estimates "$M/est/$layout" --json \
        >"$T/$layout.json" 2>"$T/err"; then
        "$PYTHON" "$REF" check "layout $layout matches numpy" "$M/expected.json" \
            "$T/$layout.json" "$layout"
    else
        fail "layout $layout" "exit $? ($(head -c 300 "$T/err"))"
    fi
done

# Per-pair confidence: AUSE per pair and its mean (pinned sparsification, numpy reference).
if "$SINEW_BIN" score --layout sintel --root "$M/sintel/training" --estimates "$M/est/sintel" \
    --confidences "$M/conf/sintel" --json >"$T/sconf.json" 2>"$T/err"; then
    "$PYTHON" "$REF" check "per-pair AUSE with --confidences matches numpy" "$M/expected.json" \
        "$T/sconf.json" sintel_conf
else
    fail "layout sintel --confidences" "exit $? ($(head -c 300 "$T/err"))"
fi
expect_error "missing confidence names the expected path" - "no confidence for pair" \
    "$SINEW_BIN" score --layout sintel --root "$M/sintel/training" --estimates "$M/est/sintel" \
    --confidences "$T/nowhere"

# Text table and CSV of one layout: same numbers as JSON, averaging named everywhere.
"$SINEW_BIN" score --layout sintel --root "$M/sintel/training" --estimates "$M/est/sintel" \
    --csv "$T/sintel.csv" >"$T/sintel.txt" 2>"$T/err" || fail "sintel csv" "$(cat "$T/err")"
"$PYTHON" "$REF" csv "CSV carries the JSON numbers" "$T/sintel.csv" "$T/sintel.json"
if grep -q "^mean-of-pairs" "$T/sintel.txt" && grep -q "^pooled-pixels" "$T/sintel.txt" &&
    grep -q "^\[occ\]" "$T/sintel.txt" && grep -q "unweighted mean" "$T/sintel.txt"; then
    pass "text table has both summary rows, the occ block and the averaging"
else
    fail "text table" "$(head -c 400 "$T/sintel.txt")"
fi
if grep -q "mean-of-pairs" "$T/sintel.csv" && grep -q '"averaging"' "$T/sintel.json"; then
    pass "CSV and JSON name the averaging"
else
    fail "averaging named" "missing in CSV or JSON"
fi

# ---- one pair --------------------------------------------------------------------------
S="$T/single"
mkdir -p "$S"
"$PYTHON" "$REF" single "$S" || fail "build single pair" "python failed"
if "$SINEW_BIN" score "$S/est.flo" "$S/gt.flo" --occ "$S/occ.png" --valid "$S/valid.png" \
    --mask "$S/ours.png" --confidence "$S/conf.npy" --json >"$T/single.json" 2>"$T/err"; then
    "$PYTHON" "$REF" check "one pair (noc/occ, mask P/R/F1, AUSE) matches numpy" \
        "$S/expected_single.json" "$T/single.json"
else
    fail "one pair" "exit $? ($(head -c 300 "$T/err"))"
fi
expect_ok "one pair text output" "$SINEW_BIN" score "$S/est.flo" "$S/gt.flo" --occ "$S/occ.png" \
    --mask "$S/ours.png" --confidence "$S/conf.npy"
if grep -q "^noc " "$T/out" && grep -q "AUSE" "$T/out" && grep -q "precision" "$T/out"; then
    pass "one pair text table"
else
    fail "one pair text table" "$(head -c 300 "$T/out")"
fi

# KITTI single pair with --noc: the same numbers as the kitti layout's first pair.
K="$M/kitti/training"
if "$SINEW_BIN" score "$M/est/kitti/000000_10.png" "$K/flow_occ/000000_10.png" \
    --noc "$K/flow_noc/000000_10.png" --json >"$T/k1.json" 2>"$T/err" &&
    "$PYTHON" -c 'import json,sys; a=json.load(open(sys.argv[1])); b=json.load(open(sys.argv[2]))["pairs"][0]
sys.exit(0 if all(a[r][k]==b[r][k] for r in ("noc","occ") for k in ("epe","n_valid")) and a["epe"]==b["epe"] else 1)' \
        "$T/k1.json" "$T/kitti.json"; then
    pass "one KITTI pair with --noc equals the layout's noc/occ split"
else
    fail "KITTI --noc" "$(head -c 300 "$T/err")"
fi

# ---- bad input -------------------------------------------------------------------------
head -c 40 "$S/est.flo" >"$T/trunc.flo"
expect_error "truncated estimate: one line, names the file" "$T/bad.csv" "trunc\.flo" \
    "$SINEW_BIN" score "$T/trunc.flo" "$S/gt.flo" --csv "$T/bad.csv"
expect_error "size mismatch: one line, names both sizes" "$T/bad.csv" "10x12.*(4x5|5x4)" \
    "$SINEW_BIN" score "$S/est.flo" "$M/chairs/00001_flow.flo" --csv "$T/bad.csv"
expect_error "mismatched occlusion mask" - "occ.png" \
    "$SINEW_BIN" score "$M/chairs/00001_flow.flo" "$M/chairs/00001_flow.flo" --occ "$S/occ.png"
expect_error "missing estimate names the expected path" "$T/bad.csv" "no estimate for pair" \
    "$SINEW_BIN" score --layout chairs --root "$M/chairs" --estimates "$T/nowhere" --csv "$T/bad.csv"
expect_error "missing ground truth file" - "nothing\.flo" \
    "$SINEW_BIN" score "$S/est.flo" "$T/nothing.flo"
printf 'a.png b.png\n' >"$T/short.txt"
expect_error "list line with 2 fields" - "short\.txt:1" \
    "$SINEW_BIN" score --layout list --root "$T/short.txt" --estimates "$T"
mkdir -p "$T/empty"
expect_error "folder without the layout's files" - "empty" \
    "$SINEW_BIN" score --layout kitti --root "$T/empty" --estimates "$T"
expect_error "unwritable CSV" - "csv" \
    "$SINEW_BIN" score "$S/est.flo" "$S/gt.flo" --csv "$T/no/such/dir/x.csv"

# ---- published data: Middlebury ground truth with a perturbed estimate -----------------
if have_data middlebury; then
    E="$T/mb"
    mkdir -p "$E"
    "$PYTHON" "$REF" middlebury "$SINEW_DATA/middlebury" "$E" || fail "middlebury estimates" "python"
    if "$SINEW_BIN" score --layout middlebury --root "$SINEW_DATA/middlebury" --estimates "$E" \
        --json >"$T/mb.json" 2>"$T/err"; then
        "$PYTHON" "$REF" check "Middlebury ground truth + noise matches numpy (8 sequences)" \
            "$E/expected.json" "$T/mb.json"
    else
        fail "Middlebury layout" "exit $? ($(head -c 300 "$T/err"))"
    fi
    # Ground truth scored against itself: EPE 0, AAE 0, density 100 % (unknown pixels of
    # Dimetrodon/Hydrangea/RubberWhale skipped: numpy counts 10772/14880/3622 on the published files).
    V="$SINEW_DATA/middlebury/Dimetrodon/flow10.flo"
    if "$SINEW_BIN" score "$V" "$V" --json >"$T/self.json" 2>"$T/err" &&
        "$PYTHON" -c 'import json,sys; d=json.load(open(sys.argv[1]));
sys.exit(0 if d["epe"]==0 and d["aae_deg"]==0 and d["n_valid"]==584*388-10772 else 1)' "$T/self.json"; then
        pass "Dimetrodon against itself: zero error, 10772 unknown pixels skipped"
    else
        fail "Dimetrodon self-score" "$(head -c 300 "$T/self.json" "$T/err")"
    fi
else
    skip "Middlebury agreement with numpy" "no $SINEW_DATA/middlebury"
fi
if have_data flyingchairs/examples; then
    C="$T/fc"
    mkdir -p "$C"
    cp "$SINEW_DATA/flyingchairs/examples/0000000-gt.flo" "$C/0000000.flo"
    cp "$SINEW_DATA/flyingchairs/examples/0000001-gt.flo" "$C/0000001.flo"
    expect_ok "FlyingChairs examples folder reads as chairs layout" "$SINEW_BIN" score \
        --layout chairs --root "$SINEW_DATA/flyingchairs/examples" --estimates "$C" --json
    if grep -q '"id":	"0000001"' "$T/out" && grep -q '"epe":	0,' "$T/out"; then
        pass "FlyingChairs examples: two pairs, ground truth scores zero"
    else
        fail "FlyingChairs examples" "$(head -c 300 "$T/out")"
    fi
else
    skip "FlyingChairs examples layout" "no $SINEW_DATA/flyingchairs/examples"
fi

# ---- --preset: sinew's own estimator, runtime per pair, --save round trip --------------
P="$T/preset"
mkdir -p "$P"
"$PYTHON" "$REF" preset "$P" || fail "build preset pairs" "python failed"
if "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --preset balanced --save "$P/saved" \
    --threads 2 --json >"$T/p1.json" 2>"$T/err"; then
    if "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --estimates "$P/saved" --json \
        >"$T/p2.json" 2>"$T/err"; then
        "$PYTHON" "$REF" same "--preset reports runtime; --save estimates rescore identically" \
            "$T/p1.json" "$T/p2.json"
    else
        fail "rescore saved estimates" "exit $? ($(head -c 300 "$T/err"))"
    fi
    # Plumbing check (frame order and flow sign): a whole-pixel shift of a smooth texture
    # must come out far below the 2-4 px shift itself; 0.5 px is our bound, not a benchmark.
    if "$PYTHON" -c 'import json,sys; d=json.load(open(sys.argv[1]));
sys.exit(0 if all(p["epe"] < 0.5 for p in d["pairs"]) else 1)' "$T/p1.json"; then
        pass "--preset balanced recovers the known shifts (EPE < 0.5 px)"
    else
        fail "--preset accuracy on shifted texture" "$(grep '"epe"' "$T/p1.json" | head -3)"
    fi
else
    fail "--preset balanced" "exit $? ($(head -c 300 "$T/err"))"
fi
# ---- --save never writes onto or inside an input, never outside DIR (issue 21, item 4) --
# On the previous main the first replaced p0/gt.flo with the estimate (a rescore then
# reported EPE 0) and the second wrote outside the --save folder.
cp "$P/p0/gt.flo" "$T/gt0.copy"
expect_error "--save onto the dataset folder is refused" - "p0/gt\.flo: is an input" \
    "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --preset fast --save "$P"
if cmp -s "$P/p0/gt.flo" "$T/gt0.copy"; then pass "--save refused: ground truth untouched"
else fail "--save refused: ground truth untouched" "p0/gt.flo changed"; fi
mkdir -p "$P/up"
printf '../p0/a.png ../p0/b.png ../../escape/gt.flo\n' >"$P/up/dotdot.txt"
expect_error "--save: '..' in a list path is refused" - "escape/gt\.flo: outside the --save folder" \
    "$SINEW_BIN" score --layout list --root "$P/up/dotdot.txt" --preset fast --save "$T/sv"
if [ -e "$T/escape" ] || [ -e "$T/sv" ]; then fail "--save '..': nothing written" "$(ls "$T")"
else pass "--save '..': nothing written"; fi
mkdir -p "$T/svl" && ln -s "$P/p1" "$T/svl/p1"
expect_error "--save through a link onto an input is refused" - "p1/gt\.flo: (is an input|outside)" \
    "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --preset fast --save "$T/svl"
expect_error "unknown preset is a usage error" - "unknown preset 'nope'" \
    "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --preset nope
expect_error "--save needs --preset" - "--save" \
    "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --estimates "$P" --save "$P/x"
expect_error "--estimates and --preset together" - "exactly one" \
    "$SINEW_BIN" score --layout list --root "$P/pairs.txt" --estimates "$P" --preset fast
expect_error "--preset with a missing frame names it" - "b\.png" \
    sh -c "rm -f '$P/p1/b.png' && '$SINEW_BIN' score --layout list --root '$P/pairs.txt' --preset fast"

# ---- our masks and confidence in dataset mode (--check, --checks) ----------------------
# A Sintel-layout folder made from the demo scene (its exact flow and occlusion truth):
# the dataset rows must carry the numbers `sinew score` gives for one pair with --mask and
# --confidence on the same check outputs (the reference for those is above).
Q="$T/qs"
"$SINEW_BIN" synth -o "$T/qscene" --frames 3 --size 96x72 >/dev/null 2>&1 ||
    fail "synth for --check" "exit $?"
mkdir -p "$Q/clean/demo" "$Q/flow/demo" "$Q/occlusions/demo" "$T/qest/demo" "$T/qchk/demo"
for i in 0 1 2; do
    cp "$T/qscene/color/00000$i.png" "$Q/clean/demo/frame_000$((i + 1)).png"
done
for i in 0 1; do
    cp "$T/qscene/truth/flow_forward/00000$i.flo" "$Q/flow/demo/frame_000$((i + 1)).flo"
    cp "$T/qscene/truth/occlusion_forward/00000$i.png" "$Q/occlusions/demo/frame_000$((i + 1)).png"
done
if "$SINEW_BIN" score --layout sintel --root "$Q" --preset fast --check --save "$T/qsave" --json \
    >"$T/qcheck.json" 2>"$T/err"; then
    pass "--preset --check runs"
else
    fail "--preset --check" "exit $? ($(head -c 300 "$T/err"))"
fi
ok=1
for n in 1 2; do
    id=demo/frame_000$n
    f0="$Q/clean/demo/frame_000$n.png" f1="$Q/clean/demo/frame_000$((n + 1)).png"
    "$SINEW_BIN" flow "$f0" "$f1" -o "$T/qest/$id.flo" --backward "$T/qb$n.flo" --preset fast \
        >/dev/null 2>&1 &&
        "$SINEW_BIN" check --forward "$T/qest/$id.flo" --backward "$T/qb$n.flo" \
            --frames "$f0" "$f1" -o "$T/qchk/$id" >/dev/null 2>&1 &&
        "$SINEW_BIN" score "$T/qest/$id.flo" "$Q/flow/$id.flo" --occ "$Q/occlusions/$id.png" \
            --mask "$T/qchk/$id/mask.png" --confidence "$T/qchk/$id/confidence.npy" --json \
            >"$T/qone$n.json" 2>"$T/err" || ok=0
done
[ $ok -eq 1 ] || fail "flow, check and score of the --check pairs" "$(head -c 300 "$T/err")"
"$SINEW_BIN" score --layout sintel --root "$Q" --estimates "$T/qest" --checks "$T/qchk" --json \
    >"$T/qchecks.json" 2>"$T/err" || fail "--estimates --checks" "$(head -c 300 "$T/err")"
if "$PYTHON" - "$T/qcheck.json" "$T/qchecks.json" "$T/qone1.json" "$T/qone2.json" <<'PY'; then
import json, math, sys
a, b = json.load(open(sys.argv[1])), json.load(open(sys.argv[2]))
ones = [json.load(open(p)) for p in sys.argv[3:]]
for run in (a, b):
    assert len(run["pairs"]) == 2
    for row, one in zip(run["pairs"], ones):
        for k in ("precision", "recall", "f1", "tp", "fp", "fn", "tn"):
            assert row["occlusion_mask"][k] == one["occlusion_mask"][k], (k, row, one)
        assert row["ause"] == one["sparsification"]["ause"], (row["ause"], one)
        assert row["ece"] == one["calibration"]["ece"], (row["ece"], one)
    m = run["summary"]["mean-of-pairs"]
    f1 = [o["occlusion_mask"]["f1"] for o in ones]
    assert abs(m["occlusion_mask"]["f1"] - sum(f1) / 2) < 1e-12, m
    assert abs(m["ece"] - sum(o["calibration"]["ece"] for o in ones) / 2) < 1e-12, m
    p = run["summary"]["pooled-pixels"]["occlusion_mask"]
    assert p["tp"] == sum(o["occlusion_mask"]["tp"] for o in ones), p
PY
    pass "--check and --checks give the one-pair mask and confidence scores"
else
    fail "--check / --checks numbers" "$(head -c 600 "$T/qcheck.json")"
fi
# --csv carries the same mask and confidence numbers (dataset rows, both summaries, and
# one pair with --mask --confidence)
"$SINEW_BIN" score --layout sintel --root "$Q" --estimates "$T/qest" --checks "$T/qchk" \
    --csv "$T/qchecks.csv" >/dev/null 2>"$T/err" || fail "--checks --csv" "$(head -c 300 "$T/err")"
"$SINEW_BIN" score "$T/qest/demo/frame_0001.flo" "$Q/flow/demo/frame_0001.flo" \
    --occ "$Q/occlusions/demo/frame_0001.png" --mask "$T/qchk/demo/frame_0001/mask.png" \
    --confidence "$T/qchk/demo/frame_0001/confidence.npy" --csv "$T/qone1.csv" >/dev/null 2>&1 ||
    fail "one pair --csv" "exit $?"
if "$PYTHON" - "$T/qchecks.json" "$T/qchecks.csv" "$T/qone1.json" "$T/qone1.csv" <<'PY'; then
import csv, json, math, sys
js, one = json.load(open(sys.argv[1])), json.load(open(sys.argv[3]))
rows = {(r["pair"], r["averaging"]): r for r in csv.DictReader(open(sys.argv[2]))}
def same(c, v):  # the CSV prints %.10g
    assert c != "" and math.isclose(float(c), v, rel_tol=1e-9, abs_tol=1e-12), (c, v)
def mask(r, m, counts=True):
    for k in ("precision", "recall", "f1"):
        same(r["occ_" + k], m[k])
    for k in ("tp", "fp", "fn", "tn"):
        assert (r["occ_" + k] == str(m[k])) if counts else r["occ_" + k] == "", (k, r)
for p in js["pairs"]:
    r = rows[(p["id"], "per-pair")]
    mask(r, p["occlusion_mask"]); same(r["ause"], p["ause"]); same(r["ece"], p["ece"])
m = js["summary"]["mean-of-pairs"]; r = rows[("summary", "mean-of-pairs")]
mask(r, m["occlusion_mask"], counts=False); same(r["ause"], m["ause"]); same(r["ece"], m["ece"])
p = js["summary"]["pooled-pixels"]; r = rows[("summary", "pooled-pixels")]
mask(r, p["occlusion_mask"]); assert r["ause"] == "" and r["ece"] == "", r
r = next(csv.DictReader(open(sys.argv[4])))
mask(r, one["occlusion_mask"]); same(r["ause"], one["sparsification"]["ause"])
same(r["ece"], one["calibration"]["ece"])
PY
    pass "--csv carries the occlusion mask P/R/F1/counts, AUSE and ECE of the JSON"
else
    fail "--csv mask and confidence columns" "$(head -3 "$T/qchecks.csv")"
fi
"$SINEW_BIN" score --layout sintel --root "$Q" --preset fast --check >"$T/qcheck.txt" 2>&1
if grep -q "occ F1" "$T/qcheck.txt" && grep -q "^  mean-of-pairs" "$T/qcheck.txt"; then
    pass "--check text table"
else
    fail "--check text table" "$(tail -5 "$T/qcheck.txt")"
fi
expect_error "--check needs --preset" - "--check" \
    "$SINEW_BIN" score --layout sintel --root "$Q" --estimates "$T/qest" --check
expect_error "--checks needs --estimates" - "--checks" \
    "$SINEW_BIN" score --layout sintel --root "$Q" --preset fast --checks "$T/qchk"
expect_error "--checks: a missing mask names its path" - "qchk/demo/frame_0002/mask\.png" \
    sh -c "rm -f '$T/qchk/demo/frame_0002/mask.png' && '$SINEW_BIN' score --layout sintel --root '$Q' --estimates '$T/qest' --checks '$T/qchk'"
