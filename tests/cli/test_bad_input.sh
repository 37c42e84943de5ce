#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Bad input to the outstage command (the contract, "The command-line tool"):
# each case must give a one-line message naming the file or the symbol (with
# its allowed range), a non-zero exit, no output file, no temporary file left
# behind, and an existing output left byte for byte as it was.
#
# Usage: test_bad_input.sh OUTSTAGE_EXE
set -u
exe=$1
# Under `meson test --setup valgrind` the tool runs under memcheck (tests/valgrind/wrap.sh).
wrap=${OS_TEST_WRAP:-}
t=$(mktemp -d /tmp/outstage-bad-XXXXXX)
trap 'chmod -R u+rwx "$t" 2>/dev/null; rm -rf "$t"' EXIT
failures=0
as_user=""

fail() {
  echo "FAIL: $*"
  failures=$((failures + 1))
}

# expect STATUS PATTERN -- ARGS...: run, check the status, that stderr is one
# line holding PATTERN (fixed string), and that nothing new appeared in $t.
expect() {
  want=$1
  pattern=$2
  shift 3
  before=$(ls -A "$t" | sort)
  $as_user $wrap "$exe" "$@" >"$t.out" 2>"$t.err"
  got=$?
  after=$(ls -A "$t" | sort)
  lines=$(wc -l <"$t.err")
  msg=$(cat "$t.err")
  if [ "$got" -ne "$want" ]; then
    fail "$*: exit $got, expected $want ($msg)"
  elif [ "$lines" -ne 1 ]; then
    fail "$*: $lines lines of message, expected one: $msg"
  elif ! grep -qF -- "$pattern" "$t.err"; then
    fail "$*: message does not name '$pattern': $msg"
  elif [ "$before" != "$after" ]; then
    fail "$*: files changed in $t: $(echo "$after" | tr '\n' ' ')"
  else
    echo "ok   exit $got: $msg"
  fi
  rm -f "$t.out" "$t.err"
}

# A valid input: the measured record of one level, a mono float WAV.
$wrap "$exe" measure opamp --from -10 --to -10 --wav "$t/in.wav" >/dev/null || fail "cannot make in.wav"
cp "$t/in.wav" "$t/in.copy"
printf 'an existing output that no failed run may touch\n' >"$t/keep.wav"
cp "$t/keep.wav" "$t/keep.copy"
printf 'plain text, not audio\n' >"$t/text.wav"
mkdir "$t/folder.wav"
printf 'x' >"$t/afile"

# Missing, unreadable and undecodable input.
expect 1 "$t/missing.wav" -- render opamp "$t/missing.wav" "$t/out.wav"
expect 1 "$t/missing.wav" -- render opamp "$t/missing.wav" "$t/keep.wav"
expect 1 "$t/folder.wav" -- render opamp "$t/folder.wav" "$t/out.wav"
cp "$t/in.wav" "$t/locked.wav" && chmod 000 "$t/locked.wav"
if [ "$(id -u)" -ne 0 ]; then
  expect 1 "$t/locked.wav" -- render opamp "$t/locked.wav" "$t/out.wav"
elif command -v setpriv >/dev/null 2>&1; then
  # root reads any file: run this case as the unprivileged user nobody, where
  # nobody can run the tool (under valgrind it must read it too, which a
  # checkout in a folder closed to others, such as one made by mktemp -d,
  # does not allow).
  chmod 777 "$t"
  as_user="setpriv --reuid=65534 --regid=65534 --clear-groups"
  if $as_user $wrap "$exe" --version >/dev/null 2>&1; then
    expect 1 "$t/locked.wav: cannot read" -- render opamp "$t/locked.wav" "$t/out.wav"
  else
    echo "note: the user nobody cannot run $exe here (a folder above it is closed to others); the unreadable input is the folder above"
  fi
  as_user=""
  chmod 700 "$t"
else
  echo "note: root without setpriv reads any file; the unreadable input is the folder above"
fi
expect 1 "$t/text.wav" -- render opamp "$t/text.wav" "$t/out.wav"
expect 1 "$t/text.wav" -- render opamp "$t/text.wav" "$t/keep.wav"

# Unknown stage, unknown symbol, a symbol of the other stage, values out of range.
expect 2 "valve" -- render valve "$t/in.wav" "$t/out.wav"
expect 2 "volume" -- render opamp "$t/in.wav" "$t/out.wav" --set volume=3
expect 2 "bias" -- render opamp "$t/in.wav" "$t/keep.wav" --set bias=1
expect 2 "ilimit takes 1 to 200 mA" -- render opamp "$t/in.wav" "$t/keep.wav" --set ilimit=500
expect 2 "rail takes 1.5 to 60 V" -- render pushpull "$t/in.wav" "$t/out.wav" --set rail=0
expect 2 "oversample takes one of 1, 2, 4, 8, 16" -- measure opamp --set oversample=3
expect 2 "beta takes 10 to 500" -- plot pushpull thd "$t/p.png" --set beta=5000
expect 2 "no-such-preset" -- render opamp "$t/in.wav" "$t/out.wav" --preset no-such-preset
expect 2 "--bogus" -- render opamp "$t/in.wav" "$t/out.wav" --bogus
expect 2 "--json" -- render opamp "$t/in.wav" "$t/out.wav" --json
expect 2 "choose one" -- measure opamp --json --csv
expect 2 "usage" -- render opamp "$t/in.wav"

# Unwritable output paths: a folder that does not exist, a file as a folder,
# a folder as the output; a report that cannot be written spoils the whole run.
expect 1 "$t/no/such/out.wav" -- render opamp "$t/in.wav" "$t/no/such/out.wav"
expect 1 "$t/afile/out.wav" -- render opamp "$t/in.wav" "$t/afile/out.wav"
expect 1 "$t/folder.wav" -- render opamp "$t/in.wav" "$t/folder.wav"
expect 1 "$t/no/r.json" -- render opamp "$t/in.wav" "$t/keep.wav" --report "$t/no/r.json"
expect 1 "$t/no/m.wav" -- measure opamp --from -10 --to -10 --wav "$t/no/m.wav"
expect 1 "$t/no/p.svg" -- plot opamp transfer "$t/no/p.svg"
expect 2 "$t/p.jpg" -- plot opamp transfer "$t/p.jpg"
expect 1 "$t/afile" -- demo "$t/afile"

# The output is the input: by name, through a symbolic link, as the report (a
# mistake in the command line: exit 2, the man page's EXIT STATUS).
ln -s in.wav "$t/link.wav"
expect 2 "$t/in.wav" -- render opamp "$t/in.wav" "$t/in.wav"
expect 2 "$t/link.wav" -- render opamp "$t/in.wav" "$t/link.wav"
expect 2 "$t/in.wav" -- render opamp "$t/in.wav" "$t/out.wav" --report "$t/in.wav"
# An output name of no known container (tests/cli/test_outputs.py has the rest).
expect 2 "$t/out.txt" -- render opamp "$t/in.wav" "$t/out.txt"

# Interrupted half-way: exit 1, no temporary file, the existing output intact.
# 24 s of input through the push-pull stage at 16x takes far longer than the
# second before the interrupt.
$wrap "$exe" measure opamp --from -60 --to 0 --step 0.25 --set oversample=1 --wav "$t/long.wav" \
  >/dev/null || fail "cannot make long.wav"
$wrap "$exe" render pushpull "$t/long.wav" "$t/keep.wav" --set oversample=16 --quiet 2>"$t.err" &
pid=$!
# memcheck takes seconds to start the tool: the interrupt must come after
# its handler is installed.
if [ -n "$wrap" ]; then sleep 15; else sleep 1; fi
kill -INT "$pid"
wait "$pid"
got=$?
if [ "$got" -eq 1 ] && grep -qF "$t/keep.wav: interrupted" "$t.err"; then
  echo "ok   exit $got: $(cat "$t.err")"
else
  fail "interrupted render: exit $got, $(cat "$t.err")"
fi
rm -f "$t.err" "$t/long.wav"

cmp -s "$t/in.wav" "$t/in.copy" || fail "the input changed"
cmp -s "$t/keep.wav" "$t/keep.copy" || fail "an existing output was clobbered by a failed run"

# A good run replaces an existing output, atomically, and leaves nothing else.
if $wrap "$exe" render opamp "$t/in.wav" "$t/keep.wav" --quiet >/dev/null 2>&1; then
  cmp -s "$t/keep.wav" "$t/keep.copy" && fail "a good run did not write its output"
  echo "ok   a good run replaced keep.wav"
else
  fail "a good render failed"
fi
leftover=$(ls -A "$t" | grep '^\.' || true)
[ -z "$leftover" ] || fail "temporary files left: $leftover"

if [ "$failures" -ne 0 ]; then
  echo "$failures failure(s)"
  exit 1
fi
echo "all bad-input checks passed"
