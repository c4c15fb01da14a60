# SPDX-License-Identifier: MIT
# Hostile environments for the real binary: disk full, file-size limit, read-only output
# folder, output path that is a directory. Each must give one error line naming the file,
# a non-zero exit, no partial output, and leave earlier outputs intact.
. tests/cli/lib.sh

tiny=$(mktemp -d "${TMPDIR:-/tmp}/sinew-tiny.XXXXXX")
cleanup_mounts() { umount "$tiny" 2>/dev/null; rm -rf "$tiny" "$T"; }
trap cleanup_mounts EXIT

# A small flow field made by the binary itself (no dataset needed): convert a seed .flo.
seed=tests/fuzz/corpus/flo/flow.flo
"$SINEW_BIN" convert "$seed" "$T/small.npy" || fail "setup" "convert of $seed failed"

big=""
if have_data middlebury; then big="$SINEW_DATA/middlebury/Grove2/flow10.flo"; fi

# --- disk full: a 64 KiB tmpfs -------------------------------------------------------
if mount -t tmpfs -o size=64k tmpfs "$tiny" 2>/dev/null; then
    expect_ok "disk-full: small output fits" "$SINEW_BIN" convert "$seed" "$tiny/first.flo"
    cp "$tiny/first.flo" "$T/first.copy"
    if [ -n "$big" ]; then
        expect_error "disk-full: large output is refused cleanly" "$tiny/big.npy" \
            "big\.npy.*(No space|space)" "$SINEW_BIN" convert "$big" "$tiny/big.npy"
        expect_error "disk-full: overwrite keeps the old file" - "first\.flo" \
            "$SINEW_BIN" convert "$big" "$tiny/first.flo"
        if cmp -s "$tiny/first.flo" "$T/first.copy"; then pass "disk-full: earlier output intact"
        else fail "disk-full: earlier output intact" "first.flo changed"; fi
        if ls -a "$tiny" | grep -q '\.tmp-'; then fail "disk-full: no temporary files" "$(ls -a "$tiny")"
        else pass "disk-full: no temporary files"; fi
    else
        skip "disk-full: large output" "needs \$SINEW_DATA/middlebury (Grove2 ground truth as a 2.4 MB input)"
    fi
    # --- read-only folder ---
    mount -o remount,ro "$tiny" 2>/dev/null && {
        expect_error "read-only folder" "$tiny/ro.flo" "ro\.flo.*(Read-only|read-only)" \
            "$SINEW_BIN" convert "$seed" "$tiny/ro.flo"
    } || skip "read-only folder" "cannot remount the test tmpfs read-only"
    umount "$tiny"
else
    skip "disk-full and read-only folder" "cannot mount a tmpfs (needs root)"
fi

# --- file-size limit (ulimit -f, in 512-byte blocks): SIGXFSZ must not kill the writer ---
if [ -n "$big" ]; then
    ( ulimit -f 64; exec "$SINEW_BIN" convert "$big" "$T/limited.flo" ) >"$T/out" 2>"$T/err"; rc=$?
    if [ "$rc" -ge 128 ]; then fail "file-size limit" "killed by a signal (exit $rc)"
    elif [ "$rc" -eq 0 ]; then fail "file-size limit" "exit 0 despite the limit"
    elif [ "$(wc -l <"$T/err")" -ne 1 ] || ! grep -q 'limited\.flo' "$T/err"; then
        fail "file-size limit" "stderr: $(cat "$T/err")"
    elif [ -e "$T/limited.flo" ] || ls -a "$T" | grep -q 'limited.flo.tmp-'; then
        fail "file-size limit" "partial output left behind"
    else pass "file-size limit"; fi
else
    skip "file-size limit" "needs \$SINEW_DATA/middlebury"
fi

# --- output path that is a directory ---
mkdir -p "$T/adir.flo"
expect_error "output is a directory" - "adir\.flo.*directory" "$SINEW_BIN" convert "$seed" "$T/adir.flo"
# --- output folder that does not exist ---
expect_error "missing output folder" "$T/nope/x.flo" "nope/x\.flo" "$SINEW_BIN" convert "$seed" "$T/nope/x.flo"

# --- devices and FIFOs as inputs (issue 21, item 1): refused at once, never read ------
# On the previous main a FIFO blocked in open() and /dev/zero was hashed forever by run;
# `timeout` turns a hang into a failure here (exit 124 and no error line).
mkfifo "$T/fifo.flo" "$T/fifo.txt"
expect_error "FIFO flow input is refused" - "fifo\.flo: not a regular file" \
    timeout -s KILL 30 "$SINEW_BIN" convert "$T/fifo.flo" "$T/fifo_out.npy"
expect_error "device flow input is refused" - "/dev/zero: not a regular file" \
    timeout -s KILL 30 "$SINEW_BIN" flow /dev/zero /dev/zero -o "$T/dev_out.flo"
expect_error "FIFO intrinsics are refused" "$T/fifo_m.npy" "fifo\.txt: not a regular file" \
    timeout -s KILL 30 "$SINEW_BIN" lift --flow "$T/small.npy" --depth0 "$T/small.npy" \
    --depth1 "$T/small.npy" --intrinsics "$T/fifo.txt" -o "$T/fifo_m.npy"
mkdir -p "$T/fiforun"
mkfifo "$T/fiforun/manifest.json"
expect_error "FIFO manifest is refused by report" "$T/fiforun/report.html" \
    "manifest\.json: not a regular file" timeout -s KILL 30 "$SINEW_BIN" report "$T/fiforun"
# A sequence whose frame is /dev/zero: the pair fails with the device named, the run ends.
"$SINEW_BIN" synth -o "$T/devseq" --frames 2 --size 64x48 >/dev/null 2>&1 ||
    fail "device frame in a run" "synth failed"
sed 's#"color/000001.png"#"/dev/zero"#' "$T/devseq/sequence.json" >"$T/devseq/dev.json"
timeout -s KILL 60 "$SINEW_BIN" run "$T/devseq/dev.json" -o "$T/devrun" --preset fast >"$T/out" 2>"$T/err"
rc=$?
if [ "$rc" -eq 1 ] && grep -q "/dev/zero: not a regular file" "$T/out" "$T/err"; then
    pass "device frame in a run"
else fail "device frame in a run" "exit $rc: $(head -c 300 "$T/err")"; fi

# --- a second SIGINT/SIGTERM stops at once (issue 21, item 1) ------------------------
# One pair of 480x360 frames with the accurate preset takes seconds, so both signals land
# inside the pair. On the previous main the second signal was ignored: the run finished
# the pair and exited 1. Now: exit 128 + signal, one line, no temporary file left, and
# --resume completes the run.
"$SINEW_BIN" synth -o "$T/sigseq" --frames 2 --size 480x360 >/dev/null 2>&1 ||
    fail "second signal" "synth failed"
for sig in INT TERM; do
    want=$([ $sig = INT ] && echo 130 || echo 143)
    out="$T/sig$sig"
    "$SINEW_BIN" run "$T/sigseq" -o "$out" --preset accurate --progress plain \
        >"$T/out" 2>"$T/err" &
    pid=$!
    # never hang (timeout(1) would relay the signals): a watchdog that ends with the run
    ( n=0; while kill -0 $pid 2>/dev/null && [ $n -lt 1200 ]; do sleep 0.1; n=$((n + 1)); done
      kill -KILL $pid 2>/dev/null ) &
    dog=$!
    n=0
    while [ $n -lt 2000 ] && [ ! -d "$out/pairs/000000-000001" ] && kill -0 $pid 2>/dev/null; do
        sleep 0.01; n=$((n + 1))
    done
    sleep 0.3
    kill -$sig $pid 2>/dev/null; sleep 0.2; kill -$sig $pid 2>/dev/null
    wait $pid; rc=$?
    wait $dog 2>/dev/null
    if [ "$rc" -ne "$want" ]; then
        fail "second SIG$sig stops at once with exit $want" "exit $rc: $(head -c 300 "$T/err")"
    elif [ "$(wc -l <"$T/err")" -ne 1 ] || ! grep -q "stopped at once" "$T/err"; then
        fail "second SIG$sig stops at once with exit $want" "stderr: $(cat "$T/err")"
    elif find "$out" -name '*.tmp-*' | grep -q .; then
        fail "second SIG$sig stops at once with exit $want" "temporaries left: $(find "$out" -name '*.tmp-*')"
    else pass "second SIG$sig stops at once with exit $want, no temporaries left"; fi
done
if timeout -s KILL 120 "$SINEW_BIN" run "$T/sigseq" -o "$T/sigINT" --preset accurate --resume \
    >"$T/out" 2>"$T/err" && grep -q "1 done, 0 failed, 0 pending" "$T/out"; then
    pass "resume after a second signal completes the run"
else fail "resume after a second signal completes the run" "$(cat "$T/out" "$T/err" | head -c 300)"; fi

# --- file names that are not UTF-8 or carry control bytes (issue 21, item 7) ----------
# Rule (docs/robustness.md): every JSON file is valid UTF-8 (a byte outside UTF-8 is
# written as \u00XX, its Latin-1 reading), report.html has no raw bytes, the terminal
# never gets a control byte from a file name. On the previous main manifest.json and
# done.json held the raw bytes and ESC reached stderr.
u8="$T/u8seq"
mkdir -p "$u8/color"
"$SINEW_BIN" synth -o "$T/u8src" --frames 3 --size 64x48 >/dev/null 2>&1
cp "$T/u8src/color/000000.png" "$(printf '%s/color/a\351t\351.png' "$u8")"
cp "$T/u8src/color/000001.png" "$(printf '%s/color/b\033[31mred.png' "$u8")"
printf 'not a png' >"$(printf '%s/color/c\351\033]0;title\007.png' "$u8")"
"$SINEW_BIN" run "$u8" -o "$T/u8run" --preset fast --on-error skip --report --progress plain \
    >"$T/u8.out" 2>"$T/u8.err"
"$PYTHON" - "$T/u8run" <<'PY' >"$T/u8.check" 2>&1
import glob, json, sys
root = sys.argv[1]
files = glob.glob(root + "/**/*.json", recursive=True)
assert any(f.endswith("manifest.json") for f in files), "no manifest"
for f in files:
    json.loads(open(f, "rb").read().decode("utf-8"))  # strict UTF-8, then JSON
m = json.load(open(root + "/manifest.json", encoding="utf-8"))
paths = [i["path"] for i in m["inputs"]]
assert any(p.endswith("a\u00e9t\u00e9.png") for p in paths), paths  # Latin-1 reading
html = open(root + "/report.html", "rb").read().decode("utf-8")
bad = [c for c in html if (ord(c) < 0x20 and c not in "\t\n") or ord(c) == 0x7f]
assert not bad, "raw control characters in report.html: %r" % bad[:5]
print("ok")
PY
if grep -qx ok "$T/u8.check"; then pass "non-UTF-8 and ESC file names: valid UTF-8 JSON, clean report"
else fail "non-UTF-8 and ESC file names: valid UTF-8 JSON, clean report" "$(tail -c 300 "$T/u8.check")"; fi
if LC_ALL=C grep -q "$(printf '\033')" "$T/u8.out" "$T/u8.err"; then
    fail "ESC in file names never reaches the terminal" "$(cat -v "$T/u8.out" "$T/u8.err" | head -c 300)"
elif ! grep -q 'x1b' "$T/u8.out" "$T/u8.err"; then
    fail "ESC in file names never reaches the terminal" "no escaped name: $(head -c 300 "$T/u8.err")"
else pass "ESC in file names never reaches the terminal (written as \\x1b)"; fi
"$SINEW_BIN" run "$u8" -o "$T/u8json" --preset fast --on-error skip --progress json \
    >"$T/u8.jsonl" 2>/dev/null
if "$PYTHON" -c 'import json,sys
[json.loads(l) for l in open(sys.argv[1], "rb").read().decode("utf-8").splitlines()]' "$T/u8.jsonl"; then
    pass "--progress json with such names: UTF-8 JSON lines"
else fail "--progress json with such names: UTF-8 JSON lines" "$(cat -v "$T/u8.jsonl" | head -c 300)"; fi

# --- smaller defects of issue 21 (item 9); each failed on the previous main ------------
"$SINEW_BIN" synth -o "$T/i9" --frames 2 --size 64x48 >/dev/null 2>&1
# an empty match table (0 rows, as match and lift write when nothing is kept) draws
"$PYTHON" - "$T/i9" <<'PY'
import json, sys
import numpy as np
d = sys.argv[1]
np.save(d + "/empty.npy", np.zeros((0, 5), np.float32))
json.dump({"columns": ["u0", "v0", "u1", "v1", "weight"]}, open(d + "/empty.json", "w"))
# a table whose header claims 30 000 000 x 8 float32 (960 MB, sparse on disk) while its
# sidecar names 5 columns: refused from the header, before the data is read
hdr = "{'descr': '<f4', 'fortran_order': False, 'shape': (30000000, 8), }"
hdr += " " * (63 - (10 + len(hdr)) % 64) + "\n"
with open(d + "/huge.npy", "wb") as f:
    f.write(b"\x93NUMPY\x01\x00" + len(hdr).to_bytes(2, "little") + hdr.encode())
    f.truncate(f.tell() + 30000000 * 8 * 4)
json.dump({"columns": ["u0", "v0", "u1", "v1", "weight"]}, open(d + "/huge.json", "w"))
# imported flows that are unknown everywhere, for stats
import os
os.makedirs(d + "/nanflow/000000-000001", exist_ok=True)
for n in ("forward", "backward"):
    np.save(d + "/nanflow/000000-000001/%s.npy" % n, np.full((48, 64, 2), np.nan, np.float32))
# a gray frame beside a colour one
g = np.zeros((48, 64), np.uint8)
os.makedirs(d + "/mixed/color", exist_ok=True)
open(d + "/mixed/color/b.pgm", "wb").write(b"P5\n64 48\n255\n" + g.tobytes())
PY
cp "$T/i9/color/000000.png" "$T/i9/mixed/color/a.png"
expect_ok "draw matches reads a 0-row table" "$SINEW_BIN" draw matches --table "$T/i9/empty.npy" \
    --frame "$T/i9/color/000000.png" --frame1 "$T/i9/color/000001.png" -o "$T/i9/empty.png"
expect_error "a table's shape is checked from its header" "$T/i9/huge.png" \
    "huge\.npy: table has 8 columns, expected 5" \
    "$SINEW_BIN" draw matches --table "$T/i9/huge.npy" \
    --frame "$T/i9/color/000000.png" --frame1 "$T/i9/color/000001.png" -o "$T/i9/huge.png"
printf '# no pairs\n\n' >"$T/i9/none.txt"
expect_error "an empty list: schedule is an error" "$T/i9/none/manifest.json" \
    "none\.txt: no 'I J' lines" "$SINEW_BIN" run "$T/i9" -o "$T/i9/none" --schedule "list:$T/i9/none.txt"
long="$T/i9"
for k in $(seq 1 30); do long="$long/a-rather-long-folder-name-for-the-test-$k"; done
expect_error "a long error message keeps its cause" - \
    "a-rather-long.*No such file or directory$" \
    "$SINEW_BIN" flow "$long/a.png" "$long/b.png" -o "$T/i9/long.flo"
expect_error "frames of different channel counts are named" - \
    "b\.pgm: 1-channel 8-bit frame, but .*a\.png is 3-channel" \
    "$SINEW_BIN" run "$T/i9/mixed" -o "$T/i9/mixedout" --preset fast
"$SINEW_BIN" run "$T/i9" -o "$T/i9/nanrun" --flow-from "$T/i9/nanflow" >/dev/null 2>&1
if "$PYTHON" -c 'import json,sys
d = json.load(open(sys.argv[1]))
sys.exit(0 if d["forward"]["mean_length_px"] is None and d["forward"]["unknown"] == 64 * 48 else 1)' \
    "$T/i9/nanrun/pairs/000000-000001/stats.json" 2>/dev/null; then
    pass "mean_length_px is null when every vector is unknown"
else fail "mean_length_px is null when every vector is unknown" \
    "$(head -c 300 "$T/i9/nanrun/pairs/000000-000001/stats.json" 2>&1)"; fi

# --- the run folder (issue 21, items 2, 3, 5, 8; issue 17 item 4) ----------------------
# Each failed on the previous main: a linked pair folder made run delete and write
# outside OUTDIR; --flow-from OUTDIR/pairs emptied the flows it was to import; no lock;
# a done.json listing only some outputs was trusted; --progress json mixed text lines in.
R="$T/rf"
mkdir -p "$R"
"$SINEW_BIN" synth -o "$R/seq" --frames 2 --size 64x48 >/dev/null 2>&1
mkdir -p "$R/out/pairs" "$R/victim"
echo "years of work" >"$R/victim/thesis.txt"
ln -s ../../victim "$R/out/pairs/000000-000001"
expect_error "a linked pair folder is refused" - "000000-000001: is a symbolic link" \
    "$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast
if [ "$(ls "$R/victim")" = "thesis.txt" ] && grep -q "years" "$R/victim/thesis.txt"; then
    pass "a linked pair folder: nothing deleted or written through the link"
else fail "a linked pair folder: nothing deleted or written through the link" "$(ls "$R/victim")"; fi
rm "$R/out/pairs/000000-000001"
"$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast >/dev/null 2>&1 || fail "run folder setup" "run failed"
P1="$R/out/pairs/000000-000001"
echo "mine" >"$P1/notes.txt"
expect_error "a file sinew did not make is never deleted" - "notes\.txt: not made by sinew" \
    "$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast --match-stride 8
if [ -f "$P1/notes.txt" ]; then pass "a foreign file in a pair folder stays"
else fail "a foreign file in a pair folder stays" "notes.txt is gone"; fi
rm "$P1/notes.txt"
"$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast >/dev/null 2>&1
cp "$P1/forward.flo" "$R/fwd.copy"
expect_error "--flow-from inside the run's own output is refused" - "overlap" \
    "$SINEW_BIN" run "$R/seq" -o "$R/out" --flow-from "$R/out/pairs"
if cmp -s "$P1/forward.flo" "$R/fwd.copy"; then pass "--flow-from refused: the flows are intact"
else fail "--flow-from refused: the flows are intact" "forward.flo changed or gone"; fi
# a live holder (this shell, on this host) and a stale one (a process that has ended)
printf 'pid %s\nhost %s\n' "$$" "$(hostname)" >"$R/out/run.lock"
expect_error "a locked output folder is refused naming the holder" - \
    "run\.lock: the output folder is in use by process $$ on host" \
    "$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast --resume
sh -c 'exit 0' & dead=$!; wait $dead
printf 'pid %s\nhost %s\n' "$dead" "$(hostname)" >"$R/out/run.lock"
expect_ok "a stale lock is removed" "$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast --resume
if [ -e "$R/out/run.lock" ]; then fail "the lock is released at the end" "run.lock left"
else pass "the lock is released at the end"; fi
# a done record that lists only the two flows (as an interleaved run left it) is not trusted
"$PYTHON" - "$P1/done.json" <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
d["outputs"] = [o for o in d["outputs"] if o["file"].startswith(("forward", "backward"))]
json.dump(d, open(sys.argv[1], "w"))
PY
rm "$P1/mask.png"
"$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast --resume --progress plain >"$T/out" 2>&1
if grep -q "1 computed, 0 skipped" "$T/out" && [ -f "$P1/mask.png" ]; then
    pass "a pair with a partial done record is recomputed"
else fail "a pair with a partial done record is recomputed" "$(tail -c 300 "$T/out")"; fi
# --progress json: only JSON lines on stdout, also with --report; stale report temporaries go
touch "$R/out/.report.html.tmp-abc123"
"$SINEW_BIN" run "$R/seq" -o "$R/out" --preset fast --resume --report --progress json \
    >"$T/rf.jsonl" 2>"$T/err"
if "$PYTHON" -c 'import json,sys
ev = [json.loads(l)["event"] for l in open(sys.argv[1])]
sys.exit(0 if "report" in ev and "summary" in ev and ev.count("end") == 1 else 1)' "$T/rf.jsonl"; then
    pass "--progress json keeps stdout pure JSON lines (with --report)"
else fail "--progress json keeps stdout pure JSON lines (with --report)" "$(head -c 300 "$T/rf.jsonl")"; fi
if ls -a "$R/out" | grep -q 'report.html.tmp-'; then
    fail "--resume removes stale report temporaries" "$(ls -a "$R/out")"
else pass "--resume removes stale report temporaries"; fi
# a pair never reached (the run stopped at the first failure) is pending, not failed
"$SINEW_BIN" synth -o "$R/seq3" --frames 3 --size 64x48 >/dev/null 2>&1
sed 's#"color/000001.png"#"color/missing.png"#' "$R/seq3/sequence.json" >"$R/seq3/miss.json"
"$SINEW_BIN" run "$R/seq3/miss.json" -o "$R/out3" --preset fast >"$T/out" 2>&1
if grep -q "0 computed, 0 skipped, 1 failed" "$T/out" && grep -q "0 done, 1 failed, 1 pending" "$T/out"; then
    pass "the run line and the manifest agree on failed pairs"
else fail "the run line and the manifest agree on failed pairs" "$(tail -c 300 "$T/out")"; fi
