#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC

# The generated bundle's Turtle: serdi must parse every file (lv2_validate
# returns 0 on a syntax error, so parsing is checked separately), and
# lv2_validate (sord_validate against the installed LV2 specifications, from
# Debian lv2-dev and sordi) must report no error.
#
# Usage: test_ttl.sh SERDI LV2_VALIDATE FILE.ttl...     (exit 77: skipped)

set -u

SERDI=${1:-}
VALIDATE=${2:-}
shift 2 || exit 2
for tool in "$SERDI" "$VALIDATE"; do
    if [ -z "$tool" ] || ! command -v "$tool" >/dev/null 2>&1; then
        echo "serdi or lv2_validate not found; skipping"
        exit 77
    fi
done
[ "$#" -gt 0 ] || { echo "no TTL files given" >&2; exit 2; }

TMP=$(mktemp -d)
trap 'rm -rf "$TMP"' EXIT INT TERM
failures=0

# The checker must bite: a file with a syntax error has to be rejected by
# serdi (and lv2_validate is shown to let it through, which is why serdi runs).
printf '@prefix lv2: <http://lv2plug.in/ns/lv2core#> .\n<urn:x> a lv2:Plugin ;; lv2:port [ .\n' \
    >"$TMP/broken.ttl"
if "$SERDI" -i turtle -o ntriples "$TMP/broken.ttl" >/dev/null 2>&1; then
    echo "FAIL serdi accepted a broken file; this test would prove nothing"
    exit 1
fi
"$VALIDATE" "$TMP/broken.ttl" >/dev/null 2>&1
echo "note: lv2_validate exit status on a syntax error: $?"

for f in "$@"; do
    if "$SERDI" -i turtle -o ntriples "$f" >"$TMP/out.nt" 2>"$TMP/err"; then
        echo "ok   serdi parses $(basename "$f") ($(wc -l <"$TMP/out.nt") triples)"
    else
        echo "FAIL serdi: $(basename "$f")"
        cat "$TMP/err"
        failures=$((failures + 1))
    fi
done

if "$VALIDATE" "$@" >"$TMP/v.out" 2>&1 && ! grep -q '^error' "$TMP/v.out"; then
    echo "ok   lv2_validate: $(grep -i 'found' "$TMP/v.out")"
else
    echo "FAIL lv2_validate:"
    cat "$TMP/v.out"
    failures=$((failures + 1))
fi

[ "$failures" -eq 0 ] || exit 1
