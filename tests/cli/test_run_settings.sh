#!/bin/sh
# SPDX-License-Identifier: MIT
# End-to-end tests of the check and lift settings and --intrinsics in `sinew run`
# (issue 17): they reach the pair's outputs, are stored in options.json, a resume with
# another value is refused naming the setting, and every setting's option name is the
# one the run's table knows. Lifted points are checked against the pinhole model
# X = (u - cx) Z / fx, Y = (v - cy) Z / fy (Hartley & Zisserman, Multiple View Geometry,
# 2nd ed., section 6.1). Inputs are the bundled generator's invented scene.
. "$(dirname "$0")/lib.sh"

B="$SINEW_BIN"
OPT="--preset fast --progress plain"
PY=${PYTHON:-/usr/bin/python3}

if ! "$B" synth -o "$T/sc" --frames 3 --size 160x120 >/dev/null 2>"$T/err"; then
    fail "synth scene" "$(cat "$T/err")"
    exit 0
fi

# settings stored and applied: top-k caps the rows, normals add columns, near drops rows
"$B" run "$T/sc/sequence.json" -o "$T/r" $OPT --fb-alpha 0.02 --near 0.5 --top-k 150 \
    --normals >"$T/out" 2>"$T/err"
rc=$?
if [ $rc -eq 0 ] && grep -q '"fb-alpha":[[:space:]]*0.02' "$T/r/options.json" \
    && grep -q '"top-k":[[:space:]]*150' "$T/r/options.json"; then
    pass "settings stored in options.json"
else
    fail "settings stored in options.json" "rc $rc: $(head -c 300 "$T/err")"
fi
if ! "$PY" -c "import numpy" 2>/dev/null; then
    skip "settings reach the matches" "python3-numpy missing"
else
    if "$PY" - "$T/r/pairs/000000-000001" >"$T/py" 2>&1 <<'PYEOF'
import json, sys
import numpy as np
d = sys.argv[1]
m = np.load(d + "/matches.npy")
cols = json.load(open(d + "/matches.json"))["columns"]
assert 0 < m.shape[0] <= 150, m.shape
assert "nx0" in cols and "nz1" in cols, cols
z0 = m[:, cols.index("Z0")]
assert np.all(z0 >= 0.5), z0.min()
PYEOF
    then pass "settings reach the matches (top-k, normals, near)"
    else fail "settings reach the matches (top-k, normals, near)" "$(tail -3 "$T/py")"; fi
fi

# a resume with another value is refused naming the setting; without it, all is skipped
expect_error "resume with another fb-alpha refused" - \
    "options.json: fb-alpha is '0.02' there but '0.03' was given" \
    "$B" run "$T/sc/sequence.json" -o "$T/r" $OPT --resume --fb-alpha 0.03
expect_error "resume with a new setting refused" - \
    "options.json: edge is 'default' there but '0.1' was given" \
    "$B" run "$T/sc/sequence.json" -o "$T/r" $OPT --resume --edge 0.1
"$B" run "$T/sc/sequence.json" -o "$T/r" --resume --progress plain >"$T/out" 2>"$T/err"
if [ $? -eq 0 ] && grep -q "0 computed, 2 skipped" "$T/out"; then
    pass "resume takes the stored settings"
else
    fail "resume takes the stored settings" "$(tail -2 "$T/out") $(head -c 200 "$T/err")"
fi

# every setting's option is known by its own name, and a bad value names it
for name in fb-alpha fb-beta boundary-alpha boundary-beta photo-threshold saturation-level \
    near far edge edge-radius max-displacement top-k cell per-cell min-weight; do
    "$B" run "$T/sc/sequence.json" -o "$T/bad" --$name x >"$T/out" 2>"$T/err"
    rc=$?
    if [ $rc -ne 2 ] || ! grep -q -- "run: --$name: expected .*, got 'x'" "$T/err"; then
        fail "option --$name" "rc $rc: $(head -c 200 "$T/err")"
        break
    fi
done
[ $rc -eq 2 ] && pass "every setting option parses under its own name"
expect_error "near >= far refused" - "near \(2 m\) must be below far \(1 m\)" \
    "$B" run "$T/sc/sequence.json" -o "$T/bad2" --near 2 --far 1
expect_error "top-k with match-stride refused" - "give one" \
    "$B" run "$T/sc/sequence.json" -o "$T/bad3" --top-k 10 --match-stride 2

# --intrinsics replaces the sequence's: the lifted points follow the given values
"$B" run "$T/sc/sequence.json" -o "$T/k" $OPT --intrinsics 150,140,70.5,60.5 \
    --match-stride 8 >"$T/out" 2>"$T/err"
rc=$?
if [ $rc -ne 0 ] || ! grep -q '"intrinsics":[[:space:]]*"150,140,70.5,60.5"' "$T/k/options.json"; then
    fail "--intrinsics stored" "rc $rc: $(head -c 300 "$T/err")"
elif ! "$PY" -c "import numpy" 2>/dev/null; then
    skip "--intrinsics lifts with the given values" "python3-numpy missing"
elif "$PY" - "$T/k/pairs/000000-000001" >"$T/py" 2>&1 <<'PYEOF'
import json, sys
import numpy as np
d = sys.argv[1]
m = np.load(d + "/matches.npy")
c = json.load(open(d + "/matches.json"))["columns"]
u, v, X, Y, Z = (m[:, c.index(k)].astype(float) for k in ("u0", "v0", "X0", "Y0", "Z0"))
assert m.shape[0] > 50, m.shape
# pinhole model with the given fx, fy, cx, cy (not the sequence's 131.25, 79.5, 59.5)
assert np.max(np.abs(X - (u - 70.5) * Z / 150)) < 1e-5, "X"
assert np.max(np.abs(Y - (v - 60.5) * Z / 140)) < 1e-5, "Y"
PYEOF
then
    pass "--intrinsics lifts with the given values"
else
    fail "--intrinsics lifts with the given values" "$(tail -3 "$T/py")"
fi
expect_error "resume with other intrinsics refused" - \
    "intrinsics is '150,140,70.5,60.5' there but '131,131,79.5,59.5' was given" \
    "$B" run "$T/sc/sequence.json" -o "$T/k" $OPT --resume --intrinsics 131,131,79.5,59.5
