# SPDX-License-Identifier: MIT
# One vocabulary for the mask reasons (issue 16 item 4): the bit table of docs/formats.md
# ("Reason mask") is the reference; `sinew check --help` and `sinew draw --help` list the
# same values and names, check.json counts and a run's stats.json reasons use the same
# keys. (The picture legend draws the same names upper-case: tests/unit/test_draw.c.)
. tests/cli/lib.sh

# "1 occluded, 2 outside, ..." from the table rows | bit | value | `MACRO` | `name` | ...
ref=$(sed -n 's/^| \([0-7]\) | \([0-9]*\) | `SINEW_MASK_[A-Z_]*` | `\([a-z_]*\)` |.*/\2 \3/p' docs/formats.md |
    paste -sd, - | sed 's/,/, /g')
names=$(echo "$ref" | sed 's/[0-9][0-9]* //g; s/, / /g')
if [ "$(echo "$names" | wc -w)" -eq 8 ]; then
    pass "docs/formats.md reason table has 8 bits: $ref"
else
    fail "reason table" "expected 8 rows in docs/formats.md, got '$ref'"
fi

# help_has CMD: the command's --help, whitespace collapsed, contains the reference list
help_has() {
    if "$SINEW_BIN" "$1" --help | tr -s ' \n' '  ' | grep -qF "$ref"; then
        pass "$1 --help lists the reasons as in docs/formats.md"
    else
        fail "$1 --help" "does not contain '$ref'"
    fi
}
help_has check
help_has draw

# keys_are FILE JSONPATH: the object's keys (minus pixels/kept) are the table's names
keys_are() {
    got=$("$PYTHON" -c 'import json, sys
o = json.load(open(sys.argv[1]))
for k in sys.argv[2].split("."): o = o[k]
print(" ".join(k for k in o if k not in ("pixels", "kept")))' "$1" "$2")
    if [ "$got" = "$names" ]; then pass "$3 uses the table's names"; else fail "$3" "'$got' != '$names'"; fi
}
if "$SINEW_BIN" synth -o "$T/s" --frames 2 --size 64x48 >/dev/null 2>"$T/err" &&
    "$SINEW_BIN" run "$T/s" -o "$T/r" --preset fast >/dev/null 2>>"$T/err" &&
    "$SINEW_BIN" check --forward "$T/r/pairs/000000-000001/forward.flo" \
        --backward "$T/r/pairs/000000-000001/backward.flo" -o "$T/c" >/dev/null 2>>"$T/err"; then
    keys_are "$T/c/check.json" counts "check.json counts"
    keys_are "$T/r/pairs/000000-000001/stats.json" check.reasons "run stats.json check.reasons"
else
    fail "reason keys" "synth/run/check failed: $(head -c 200 "$T/err")"
fi
