#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of `sinew run`: whole run, resume, thread counts, concurrent shards and
# merge, SIGKILL at random moments then resume, SIGINT, corrupt frames with both error
# policies, timestamp association, imported flows, dry run, usage errors.
# Byte identity is checked with `diff -r` over whole output trees.
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"
KILLS="${SINEW_RUN_KILLS:-20}"

# ---- a small generated sequence: 6 frames 160x120 (textured, shifting), float depth in
# metres (.npy), intrinsics. Invented data for tests only.
mkseq() { # DIR
    "$PYTHON" - "$1" <<'PY'
import json, os, sys
import numpy as np
d = sys.argv[1]
for s in ("color", "depth"):
    os.makedirs(os.path.join(d, s), exist_ok=True)
rng = np.random.default_rng(7)
H, W = 120, 160
base = rng.random((H + 40, W + 40))
k = np.ones(5) / 5  # smooth the noise so flow has texture at several scales
for ax in (0, 1):
    base = np.apply_along_axis(lambda r: np.convolve(r, k, mode="same"), ax, base)
yy, xx = np.mgrid[0:H, 0:W]
for f in range(6):
    ox, oy = 10 + 1.5 * f, 10 + 0.5 * f
    x0 = np.floor(xx + ox).astype(int); y0 = np.floor(yy + oy).astype(int)
    ax_, ay_ = xx + ox - x0, yy + oy - y0
    g = ((1 - ax_) * (1 - ay_) * base[y0, x0] + ax_ * (1 - ay_) * base[y0, x0 + 1]
         + (1 - ax_) * ay_ * base[y0 + 1, x0] + ax_ * ay_ * base[y0 + 1, x0 + 1])
    g = (g - g.min()) / (g.max() - g.min() + 1e-9)
    rgb = np.stack([g, 0.5 * g + 0.25, 1 - g], axis=-1)
    img = (rgb * 255 + 0.5).astype(np.uint8)
    with open(os.path.join(d, "color", "f%02d.ppm" % f), "wb") as fh:
        fh.write(b"P6\n%d %d\n255\n" % (W, H)); fh.write(img.tobytes())
    z = (0.8 + 0.1 * xx / W + 0.01 * f).astype(np.float32)
    np.save(os.path.join(d, "depth", "f%02d.npy" % f), z)
json.dump({"fx": 150.0, "fy": 150.0, "cx": 79.5, "cy": 59.5, "width": W, "height": H},
          open(os.path.join(d, "intrinsics.json"), "w"))
PY
}

if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
    skip "run tests" "python3-numpy missing"
    exit 0
fi
mkseq "$T/seq"
OPT="--preset fast --progress plain"

# same_products A B: flows, masks, confidences and match tables of every pair agree
# (records and sidecars name input paths, which differ between copies of a sequence)
same_products() {
    for d in "$1"/pairs/*/; do
        p=$(basename "$d")
        for f in forward.flo backward.flo mask.png confidence.npy matches.npy; do
            cmp -s "$1/pairs/$p/$f" "$2/pairs/$p/$f" || return 1
        done
    done
    return 0
}

# ---- whole run (its duration sets the range of the random kill times below)
t0=$(date +%s%N)
if "$B" run "$T/seq" -o "$T/whole" $OPT >"$T/whole.out" 2>"$T/whole.err"; then
    pass "whole run exits 0"
else
    fail "whole run exits 0" "$(cat "$T/whole.err")"
fi
ms=$(( ($(date +%s%N) - t0) / 1000000 ))
ok=1
for p in 000000-000001 000004-000005; do
    for f in forward.flo backward.flo mask.png confidence.npy matches.npy matches.json stats.json done.json; do
        [ -f "$T/whole/pairs/$p/$f" ] || { ok=0; echo "missing $p/$f"; }
    done
done
[ $ok = 1 ] && pass "whole run writes every per-pair file" || fail "whole run writes every per-pair file" "see above"
if grep -q '"done":	5' "$T/whole/manifest.json" && grep -q '"pending":	0' "$T/whole/manifest.json"; then
    pass "manifest: 5 pairs done"
else
    fail "manifest: 5 pairs done" "$(head -c 400 "$T/whole/manifest.json")"
fi
# external check: the manifest's SHA-256 of each input agrees with coreutils sha256sum
"$PYTHON" - "$T/whole/manifest.json" >"$T/sums" <<'PY'
import json, sys
m = json.load(open(sys.argv[1]))
for e in m["inputs"]:
    print(e["sha256"] + "  " + e["path"])
PY
if sha256sum -c --quiet "$T/sums" >/dev/null 2>&1 && [ "$(wc -l <"$T/sums")" -eq 13 ]; then
    pass "manifest input hashes match sha256sum"
else
    fail "manifest input hashes match sha256sum" "$(sha256sum -c "$T/sums" 2>&1 | head -3)"
fi
# the 3-D columns are present because depth and intrinsics were given; numpy loads it
if "$PYTHON" -c "
import json, numpy as np, sys
m = np.load('$T/whole/pairs/000001-000002/matches.npy')
c = json.load(open('$T/whole/pairs/000001-000002/matches.json'))['columns']
assert m.ndim == 2 and m.shape[1] == len(c) and 'Z1' in c and m.shape[0] > 100, (m.shape, c)
" 2>"$T/py.err"; then pass "matches load in numpy with lifted columns"
else fail "matches load in numpy with lifted columns" "$(tail -1 "$T/py.err")"; fi

# ---- resume of a complete run: everything skipped, bytes unchanged
cp -r "$T/whole" "$T/again"
if "$B" run "$T/seq" -o "$T/again" $OPT --resume >"$T/out" 2>&1 && grep -q "0 computed, 5 skipped" "$T/out" \
    && diff -r "$T/whole" "$T/again" >/dev/null; then
    pass "resume of a complete run skips every pair"
else
    fail "resume of a complete run skips every pair" "$(tail -2 "$T/out")"
fi
# a temporary options record left by a run killed while writing it goes on the next
# resume (it made the random-kill test below fail once: diff -r found it)
cp -r "$T/whole" "$T/stale"
echo partial >"$T/stale/.options.json.tmp-abc123"
if "$B" run "$T/seq" -o "$T/stale" $OPT --resume >"$T/out" 2>&1 && diff -r "$T/whole" "$T/stale" >/dev/null; then
    pass "resume removes a stale options temporary"
else
    fail "resume removes a stale options temporary" "$(diff -rq "$T/whole" "$T/stale" | head -2)"
fi
# a lock is written beside its name and then linked, so a run killed while taking it
# leaves no half-written lock (an empty run.lock refused every later run: the
# random-kill test below found it under the sanitizer build); the leftover temporary
# of a process that is gone goes on the next run
sh -c 'exit 0' &
dead=$!
wait $dead
echo "pid $dead" >"$T/stale/.run.lock.$dead"
if "$B" run "$T/seq" -o "$T/stale" $OPT --resume >"$T/out" 2>&1 && diff -r "$T/whole" "$T/stale" >/dev/null; then
    pass "resume removes a dead process's lock temporary"
else
    fail "resume removes a dead process's lock temporary" "$(cat "$T/out" | tail -2) $(diff -rq "$T/whole" "$T/stale" | head -2)"
fi

# ---- thread counts give identical bytes (the whole run used the default count)
"$B" run "$T/seq" -o "$T/t1" $OPT --threads 1 >/dev/null 2>&1
if diff -r "$T/whole" "$T/t1" >/dev/null; then
    pass "1 thread and the default give identical bytes"
else
    fail "1 thread and the default give identical bytes" "$(diff -rq "$T/whole" "$T/t1" | head -3)"
fi

# ---- pairs at once (--jobs): the same bytes for any count, also with one thread each
"$B" run "$T/seq" -o "$T/j1" $OPT --jobs 1 >"$T/j1.out" 2>&1
"$B" run "$T/seq" -o "$T/j3" $OPT --jobs 3 --threads 1 >"$T/j3.out" 2>&1
"$B" run "$T/seq" -o "$T/j2" $OPT --jobs 2 --threads 3 --progress plain >"$T/j2.out" 2>&1
if diff -r "$T/whole" "$T/j1" >/dev/null && diff -r "$T/whole" "$T/j3" >/dev/null \
    && diff -r "$T/whole" "$T/j2" >/dev/null; then
    pass "--jobs 1, 2 and 3 give the bytes of the default run"
else
    fail "--jobs 1, 2 and 3 give the bytes of the default run" "$(diff -rq "$T/whole" "$T/j3" | head -3)"
fi
if [ "$(sed -n 's/^\([0-9]*\)\/[0-9]* \([0-9-]*\) .*/\1 \2/p' "$T/j2.out" | tr '\n' ' ')" = \
    "1 000000-000001 2 000001-000002 3 000002-000003 4 000003-000004 5 000004-000005 " ]; then
    pass "--jobs 2 reports pairs in schedule order"
else
    fail "--jobs 2 reports pairs in schedule order" "$(head -5 "$T/j2.out")"
fi
expect_error "--jobs out of range" - 'jobs' "$B" run "$T/seq" -o "$T/jx" $OPT --jobs -1
expect_error "--jobs not a number" - 'jobs' "$B" run "$T/seq" -o "$T/jx" $OPT --jobs two

# ---- three concurrent shards into one folder, then merge
"$B" run "$T/seq" -o "$T/sh" $OPT --shard 0/3 >"$T/s0" 2>&1 &
p0=$!
"$B" run "$T/seq" -o "$T/sh" $OPT --shard 1/3 >"$T/s1" 2>&1 &
p1=$!
"$B" run "$T/seq" -o "$T/sh" $OPT --shard 2/3 >"$T/s2" 2>&1
r2=$?
wait $p0; r0=$?
wait $p1; r1=$?
if [ $r0 -eq 0 ] && [ $r1 -eq 0 ] && [ $r2 -eq 0 ] && [ ! -e "$T/sh/manifest.json" ]; then
    pass "three concurrent shards succeed without writing the manifest"
else
    fail "three concurrent shards succeed without writing the manifest" "exit $r0 $r1 $r2"
fi
if "$B" run "$T/seq" -o "$T/sh" $OPT --merge >"$T/out" 2>&1 && diff -r "$T/whole" "$T/sh" >/dev/null; then
    pass "merged shards are byte-identical to a whole run"
else
    fail "merged shards are byte-identical to a whole run" "$(diff -rq "$T/whole" "$T/sh" | head -3)"
fi

# ---- SIGKILL at random moments, then resume: identical bytes
rnd() { od -An -N2 -tu2 /dev/urandom | tr -d ' '; }
[ "$ms" -lt 50 ] && ms=50
i=0
while [ $i -lt "$KILLS" ]; do
    "$B" run "$T/seq" -o "$T/killed" $OPT --resume >/dev/null 2>&1 &
    pid=$!
    d=$(( $(rnd) % (ms / 2 + 1) ))  # kills land in the first half: most of them mid-run
    sleep "$(printf '%d.%03d' $((d / 1000)) $((d % 1000)))"
    kill -KILL $pid 2>/dev/null
    wait $pid 2>/dev/null
    i=$((i + 1))
done
"$B" run "$T/seq" -o "$T/killed" $OPT --resume >"$T/out" 2>&1
if [ $? -eq 0 ] && diff -r "$T/whole" "$T/killed" >/dev/null; then
    pass "$KILLS SIGKILLs at random moments, then resume: identical bytes"
else
    fail "$KILLS SIGKILLs at random moments, then resume: identical bytes" \
        "$(diff -rq "$T/whole" "$T/killed" | head -3)"
fi

# ---- SIGINT: stops after the current pair, writes the manifest, exits 1 with a message
"$B" run "$T/seq" -o "$T/int" $OPT >"$T/int.out" 2>"$T/int.err" &
pid=$!
# Signal as soon as the first pair is complete, so the run is still going on fast machines.
n=0
while [ $n -lt 1000 ] && ! ls "$T"/int/pairs/*/done.json >/dev/null 2>&1 && kill -0 $pid 2>/dev/null; do
    sleep 0.005; n=$((n + 1))
done
kill -INT $pid
wait $pid
rc=$?
if [ $rc -eq 0 ] && [ -f "$T/int/manifest.json" ]; then
    skip "SIGINT stops the run" "the run finished before the signal arrived"
elif [ $rc -eq 1 ] && [ "$(wc -l <"$T/int.err")" -eq 1 ] && grep -q "interrupted" "$T/int.err" \
    && [ -f "$T/int/manifest.json" ]; then
    pass "SIGINT stops after the current pair with a message and a manifest"
else
    fail "SIGINT stops after the current pair with a message and a manifest" "exit $rc: $(cat "$T/int.err")"
fi
"$B" run "$T/seq" -o "$T/int" $OPT --resume >/dev/null 2>&1
if diff -r "$T/int" "$T/whole" >/dev/null; then pass "resume after SIGINT gives identical bytes"
else fail "resume after SIGINT gives identical bytes" "$(diff -rq "$T/int" "$T/whole" | head -3)"; fi

# ---- corrupt frame: stop policy names the file; skip policy records it and goes on
cp -r "$T/seq" "$T/bad"
head -c 100 "$T/seq/color/f03.ppm" >"$T/bad/color/f03.ppm"
expect_error "corrupt frame stops the run naming the file" - "f03\.ppm" \
    "$B" run "$T/bad" -o "$T/bad_stop" $OPT
if [ -f "$T/bad_stop/pairs/000001-000002/done.json" ] && [ -f "$T/bad_stop/pairs/000002-000003/error.json" ] \
    && [ ! -e "$T/bad_stop/pairs/000002-000003/forward.flo" ]; then
    pass "pairs before the corrupt frame are kept; the failed pair has only an error record"
else
    fail "pairs before the corrupt frame are kept; the failed pair has only an error record" "$(ls -R "$T/bad_stop" | head)"
fi
expect_error "corrupt frame with --on-error skip exits non-zero at the end" - "2 of 5 pairs failed.*f03\.ppm" \
    "$B" run "$T/bad" -o "$T/bad_skip" $OPT --on-error skip
if grep -q '"failed":	2' "$T/bad_skip/manifest.json" && grep -q '"done":	3' "$T/bad_skip/manifest.json" \
    && [ -f "$T/bad_skip/pairs/000004-000005/done.json" ]; then
    pass "skip policy: manifest records 2 failed and 3 done pairs"
else
    fail "skip policy: manifest records 2 failed and 3 done pairs" "$(grep -A3 summary "$T/bad_skip/manifest.json")"
fi
# repairing the frame and resuming completes the run with the whole run's pair bytes
cp "$T/seq/color/f03.ppm" "$T/bad/color/f03.ppm"
"$B" run "$T/bad" -o "$T/bad_skip" $OPT --resume >"$T/out" 2>&1
if grep -q "2 computed, 3 skipped" "$T/out" && same_products "$T/whole" "$T/bad_skip"; then
    pass "after repair, resume computes exactly the failed pairs"
else
    fail "after repair, resume computes exactly the failed pairs" "$(tail -1 "$T/out")"
fi

# ---- timestamp association (rgb.txt/depth.txt): crafted stamps, 0.02 s tolerance
mkdir -p "$T/tum/rgb" "$T/tum/depth"
for f in 0 1 2 3; do cp "$T/seq/color/f0$f.ppm" "$T/tum/rgb/$f.ppm"; cp "$T/seq/depth/f0$f.npy" "$T/tum/depth/$f.npy"; done
printf '# colour\n1.000 rgb/0.ppm\n1.033 rgb/1.ppm\n1.066 rgb/2.ppm\n1.100 rgb/3.ppm\n' >"$T/tum/rgb.txt"
# depth of rgb/2 is 25 ms away (dropped); the others within 5 ms
printf '1.004 depth/0.npy\n1.030 depth/1.npy\n1.091 depth/2.npy\n1.104 depth/3.npy\n' >"$T/tum/depth.txt"
if "$B" run "$T/tum" -o "$T/tumout" $OPT --dry-run >"$T/out" 2>&1 && [ "$(grep -c '^0000' "$T/out")" -eq 2 ]; then
    pass "timestamp association keeps 3 of 4 colour frames (2 pairs)"
else
    fail "timestamp association keeps 3 of 4 colour frames (2 pairs)" "$(cat "$T/out")"
fi
# ---- stored options (OUTDIR/options.json): resume and merge reuse the run's options
# (issue 17: a fast run resumed without --preset was recomputed with balanced; a merge
# without the shards' options found every pair pending)
if "$B" run "$T/seq" -o "$T/again" --resume --progress plain >"$T/out" 2>&1 \
    && grep -q "0 computed, 5 skipped" "$T/out" && diff -r "$T/whole" "$T/again" >/dev/null; then
    pass "resume without the options takes them from options.json"
else
    fail "resume without the options takes them from options.json" "$(tail -2 "$T/out")"
fi
expect_error "resume with a different preset is refused, naming key and values" - \
    "again/options\.json: preset is 'fast' there but 'accurate' was given" \
    "$B" run "$T/seq" -o "$T/again" --resume --preset accurate --progress plain
if diff -r "$T/whole" "$T/again" >/dev/null; then pass "a refused resume changes nothing"
else fail "a refused resume changes nothing" "$(diff -rq "$T/whole" "$T/again" | head -3)"; fi
expect_error "merge with a different match stride is refused" - "match_stride is '4' there but '2'" \
    "$B" run "$T/seq" -o "$T/sh" --merge --match-stride 2
if "$B" run "$T/seq" -o "$T/sh" --merge >"$T/out" 2>&1 && grep -q "5 done, 0 failed, 0 pending" "$T/out"; then
    pass "merge without the shards' options finds every pair done"
else
    fail "merge without the shards' options finds every pair done" "$(tail -2 "$T/out")"
fi
if grep -q "run: sinew run $T/seq -o $T/sh --merge" "$T/s2"; then pass "shard hint prints a merge command that works"
else fail "shard hint prints a merge command that works" "$(tail -1 "$T/s2")"; fi
expect_error "a shard with other options than the stored ones is refused" - "preset is 'fast' there" \
    "$B" run "$T/seq" -o "$T/sh" --shard 1/3 --preset balanced
cp -r "$T/again" "$T/forced"
"$B" run "$T/seq" -o "$T/forced" --resume --match-stride 8 --force-options --progress plain >"$T/out" 2>&1
if grep -q "5 computed, 0 skipped" "$T/out" && grep -q '"match_stride":	8' "$T/forced/options.json" \
    && grep -q '"preset":	"fast"' "$T/forced/options.json"; then
    pass "--force-options recomputes with the given option and stores it"
else
    fail "--force-options recomputes with the given option and stores it" "$(tail -2 "$T/out")"
fi
printf '{"sinew_run_options": 1, "preset": "fast"}\n' >"$T/forced/options.json"
expect_error "an incomplete options.json is refused, naming the file and key" - "forced/options\.json: flow_format" \
    "$B" run "$T/seq" -o "$T/forced" --resume

"$B" run "$T/tum" -o "$T/tumout" $OPT --max-dt 0.03 --dry-run >"$T/out" 2>&1
[ "$(grep -c '^0000' "$T/out")" -eq 3 ] && pass "--max-dt 0.03 keeps all 4 frames" || fail "--max-dt 0.03 keeps all 4 frames" "$(cat "$T/out")"

# ---- dry run writes nothing
if "$B" run "$T/seq" -o "$T/dry" $OPT --dry-run --shard 1/2 >"$T/out" 2>&1 && [ ! -e "$T/dry" ] \
    && [ "$(grep -c '^0000' "$T/out")" -eq 2 ] && grep -q "disk about" "$T/out"; then
    pass "dry run lists the shard's pairs and an estimate, writes nothing"
else
    fail "dry run lists the shard's pairs and an estimate, writes nothing" "$(cat "$T/out")"
fi
# the estimate comes from a probe pair run in a temporary folder that is removed again;
# disk is the probe's bytes times the pairs (issue 17: estimates were 20-70x off)
mkdir -p "$T/probe_tmp"
if TMPDIR="$T/probe_tmp" "$B" run "$T/seq" -o "$T/dry" $OPT --dry-run >"$T/out" 2>&1 \
    && [ -z "$(ls -A "$T/probe_tmp")" ] && [ ! -e "$T/dry" ]; then
    pass "dry run probe leaves nothing behind"
else
    fail "dry run probe leaves nothing behind" "$(ls -A "$T/probe_tmp") $(tail -1 "$T/out")"
fi
est=$(sed -n 's/.*disk about \([0-9.]*\) MB.*/\1/p' "$T/out")
real=$(cat "$T"/whole/pairs/*/* | wc -c)
if awk -v e="$est" -v r="$real" 'BEGIN { d = e * 1e6 / r; exit !(d > 0.9 && d < 1.1) }'; then
    pass "dry run disk estimate within 10% of the real run"
else
    fail "dry run disk estimate within 10% of the real run" "estimated $est MB, real $real bytes"
fi

# ---- imported .flo flows: check and matches only, same results as from estimated flows
if "$B" run "$T/seq" -o "$T/imp" $OPT --flow-from "$T/whole/pairs" >"$T/out" 2>"$T/err"; then
    ok=1
    for p in 000000-000001 000003-000004; do
        for f in forward.flo backward.flo mask.png confidence.npy matches.npy; do
            cmp -s "$T/whole/pairs/$p/$f" "$T/imp/pairs/$p/$f" || { ok=0; echo "$p/$f differs"; }
        done
    done
    grep -q '"flow_source":"imported"' "$T/imp/pairs/000000-000001/stats.json" || ok=0
    [ $ok = 1 ] && pass "--flow-from with .flo files reproduces check and matches" \
        || fail "--flow-from with .flo files reproduces check and matches" "see above"
else
    fail "--flow-from with .flo files reproduces check and matches" "$(cat "$T/err")"
fi
mkdir -p "$T/partial/000000-000001"
cp "$T/whole/pairs/000000-000001/forward.flo" "$T/partial/000000-000001/"
expect_error "--flow-from names a missing imported flow" - "000000-000001/backward\.flo: imported flow not found" \
    "$B" run "$T/seq" -o "$T/imp2" $OPT --flow-from "$T/partial"

# ---- usage errors
expect_error "bad --shard is a usage error" - "--shard" "$B" run "$T/seq" -o "$T/u" --shard 3/3
expect_error "bad --schedule is a usage error" - "--schedule" "$B" run "$T/seq" -o "$T/u" --schedule gap:0
expect_error "missing input folder is named" - "nope" "$B" run "$T/nope" -o "$T/u"
expect_error "duplicate pair in a list schedule is named" - "listed twice" \
    sh -c "printf '0 1\n2 3\n0 1\n' >'$T/list.txt'; '$B' run '$T/seq' -o '$T/u' --schedule list:'$T/list.txt'"
if "$B" run --help | grep -q "not a medical device"; then pass "help ends with the notice"; else fail "help ends with the notice" ""; fi

# ---- the generated demo sequence (sinew synth) through sequence.json
if "$B" synth -o "$T/demo" --frames 6 --size 160x120 >/dev/null 2>"$T/err"; then
    if "$B" run "$T/demo/sequence.json" -o "$T/demorun" $OPT --report >"$T/out" 2>"$T/err" \
        && grep -q '"done":	5' "$T/demorun/manifest.json" && [ -f "$T/demorun/report.html" ] \
        && grep -q '"lifted":true' "$T/demorun/pairs/000002-000003/stats.json"; then
        pass "demo sequence.json: 5 pairs done, lifted matches, report written"
    else
        fail "demo sequence.json: 5 pairs done, lifted matches, report written" "$(cat "$T/err")"
    fi
    # a folder holding sequence.json is the same input
    "$B" run "$T/demo" -o "$T/demorun2" $OPT --report >/dev/null 2>&1
    # (report.html names the run folder, so it is left out here)
    if diff -r -x report.html "$T/demorun" "$T/demorun2" >/dev/null; then pass "folder with sequence.json = the file"
    else fail "folder with sequence.json = the file" "$(diff -rq "$T/demorun" "$T/demorun2" | head -3)"; fi

    # dry run: every input checked, missing ones listed by name, exit 1 (issue 17: a
    # missing frame passed the dry run and failed the real run later)
    mv "$T/demo/depth/000003.png" "$T/demo/depth/000003.keep"
    expect_error "dry run names a missing frame and fails" - "1 input file missing" \
        "$B" run "$T/demo" -o "$T/dry" $OPT --dry-run
    if grep -q "input depth: .*depth/000003.png: missing" "$T/out" && [ ! -e "$T/dry" ]; then
        pass "dry run lists the missing frame by name"
    else fail "dry run lists the missing frame by name" "$(cat "$T/out")"; fi
    mv "$T/demo/depth/000003.keep" "$T/demo/depth/000003.png"
    # headers, not only names: a truncated frame and a depth map of another size are
    # named before any pair runs (the real run would fail on them midway)
    cp "$T/demo/color/000004.png" "$T/demo/color/000004.keep"
    head -c 300 "$T/demo/color/000004.keep" >"$T/demo/color/000004.png"
    "$B" synth -o "$T/demosmall" --frames 2 --size 80x60 >/dev/null 2>&1
    cp "$T/demo/depth/000002.png" "$T/demo/depth/000002.keep"
    cp "$T/demosmall/depth/000000.png" "$T/demo/depth/000002.png"
    expect_error "dry run reads headers: damaged and wrongly sized inputs fail it" - \
        "2 input files missing, unreadable or wrongly sized" "$B" run "$T/demo" -o "$T/dry" $OPT --dry-run
    if grep -q "input color: .*color/000004.png: truncated PNG data" "$T/out" \
        && grep -q "input depth: .*depth/000002.png: 80x60 but .*color/000000.png is 160x120" "$T/out" \
        && [ ! -e "$T/dry" ]; then
        pass "dry run names the truncated frame and the depth map of another size"
    else fail "dry run names the truncated frame and the depth map of another size" "$(cat "$T/out")"; fi
    mv "$T/demo/color/000004.keep" "$T/demo/color/000004.png"
    mv "$T/demo/depth/000002.keep" "$T/demo/depth/000002.png"
    # --dry-run --resume counts what a resumed run would skip and probes only the rest
    cp -r "$T/demorun" "$T/dryres"
    rm "$T/dryres/pairs/000002-000003/done.json"
    if "$B" run "$T/demo" -o "$T/dryres" $OPT --dry-run --resume >"$T/out" 2>&1 \
        && [ "$(grep -c '^0000.* done$' "$T/out")" -eq 4 ] && grep -q "^000002-000003$" "$T/out" \
        && grep -q "5 pairs (4 done, 1 to compute); disk about" "$T/out" \
        && [ ! -e "$T/dryres/pairs/000002-000003/done.json" ]; then
        pass "dry run with --resume counts the done pairs, probes the rest, writes nothing"
    else fail "dry run with --resume counts the done pairs, probes the rest, writes nothing" "$(cat "$T/out")"; fi

    # schema: run settings, numbered frame pattern, errors naming the key
    cd "$T/demo" || exit 1
    mkjson() { # NAME TEXT
        printf '%s\n' "$2" >"$T/demo/$1"
    }
    INTR='"intrinsics": {"fx": 131.25, "fy": 131.25, "cx": 79.5, "cy": 59.5, "width": 160, "height": 120}'
    mkjson pat.json '{"version": 1, '"$INTR"', "depth_scale": 1000,
      "frames": {"color": "color/%06d.png", "depth": "depth/%06d.png", "first": 1, "count": 5},
      "run": {"schedule": {"kind": "keyframe", "every": 2, "window": 2}, "preset": "fast",
              "flow_format": "npy16", "match_stride": 8}}'
    if "$B" run "$T/demo/pat.json" -o "$T/patrun" --progress plain >"$T/out" 2>"$T/err" \
        && [ -f "$T/patrun/pairs/000000-000002/forward.npy" ] && [ -f "$T/patrun/pairs/000002-000004/backward.npy" ] \
        && [ "$(ls "$T/patrun/pairs" | wc -l)" -eq 4 ] && grep -q '"flow_format":[[:space:]]*"npy16"' "$T/patrun/manifest.json"; then
        pass "sequence.json frame pattern and run settings (keyframe schedule, npy16)"
    else
        fail "sequence.json frame pattern and run settings (keyframe schedule, npy16)" "$(cat "$T/err") $(ls "$T/patrun/pairs" 2>&1)"
    fi
    "$PYTHON" -c "
import numpy as np; a = np.load('$T/patrun/pairs/000000-000001/forward.npy')
assert a.dtype == np.float16 and a.shape == (120, 160, 2), (a.dtype, a.shape)" 2>"$T/py.err" \
        && pass "npy16 flows load in numpy as float16 H x W x 2" || fail "npy16 flows load in numpy as float16 H x W x 2" "$(tail -1 "$T/py.err")"
    mkjson bad1.json '{"version": 1, "frames": [{"color": "color/000000.png"}], "runn": {}}'
    expect_error "schema: unknown top-level key is named" - "bad1\.json.*runn" "$B" run "$T/demo/bad1.json" -o "$T/u"
    mkjson bad2.json '{"version": 1, "frames": [{"color": "color/000000.png"}, {"color": "color/000001.png"}], "run": {"schedule": {"kind": "gap", "gap": "2"}}}'
    expect_error "schema: wrong type is named" - "run\.schedule\.gap" "$B" run "$T/demo/bad2.json" -o "$T/u"
    mkjson bad3.json '{"version": 1, "frames": {"color": "color/%06x.png", "count": 3}}'
    expect_error "schema: bad frame pattern is named" - "frames\.color.*pattern" "$B" run "$T/demo/bad3.json" -o "$T/u"
    mkjson bad4.json '{"version": 1, "frames": {"color": "color/%06d.png", "count": 2000000}}'
    expect_error "schema: frame count limit before allocation" - "frames\.count" "$B" run "$T/demo/bad4.json" -o "$T/u"
    mkjson bad5.json '{"version": 1, "frames": [{"color": "color/000000.png"}, {"color": "color/000001.png"}], "run": {"schedule": {"kind": "list", "pairs": [[0, 1], [1, 7]]}}}'
    expect_error "schema: list pair out of range is named" - "run\.schedule\.pairs\[1\]" "$B" run "$T/demo/bad5.json" -o "$T/u"
    mkjson bad6.json '{"version": 1, "frames": [{"color": "color/000000.png"}], "run": {"flow_format": "jpg"}}'
    expect_error "schema: unknown flow format is named" - "run\.flow_format" "$B" run "$T/demo/bad6.json" -o "$T/u"
    cd - >/dev/null || exit 1
else
    skip "demo sequence tests" "sinew synth failed: $(head -c 200 "$T/err")"
fi
