# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
"""What `outstage` does to the files it is given (issue 10's defects, each a
check here that failed before the fix):

1. two outputs of one run that are one file, by any path or link: refused
   before anything is written;
2. devices and FIFOs written in place, symbolic links written through, a
   replaced file's mode kept, a write-protected one refused without --force;
3. a truncated WAV or AIFF named in a warning with both frame counts;
4. the channel layout (WAVE_FORMAT_EXTENSIBLE mask) kept;
5. the container chosen from the output's extension, an unknown one refused;
6. numbers: decimal only, spaces trimmed, one range rule, one exit code per
   kind of error (the man page, EXIT STATUS);
7. impossible combinations of controls said on stderr and in the JSON report;
8. render keeps the input's length and time alignment (latency compensated,
   the tail rendered), --stream gives the plugin's own stream;
9. the report gives the circuit's own peak load voltage beside the file's.

The references are outside the project: the RIFF/WAVE and
WAVE_FORMAT_EXTENSIBLE layouts (Microsoft, "Multiple channel audio data and
WAVE files", 2001; the mask bits SPEAKER_FRONT_LEFT = 0x1 ...), the magic
numbers of each container (FLAC "fLaC", Ogg "OggS" with "OpusHead" or
"\\x01vorbis", AIFF "FORM....AIFF", CAF "caff", W64's RIFF GUID, RF64, AU
".snd", MPEG frame sync 0xFFE), POSIX file types (stat), and Ohm's law for the
peak load voltage into a resistor (v = i R).

Usage: test_outputs.py OUTSTAGE_EXE
"""

import json
import math
import os
import stat
import struct
import subprocess
import sys
import tempfile
import threading

EXE = os.path.abspath(sys.argv[1])
# Under `meson test --setup valgrind` the tool runs under memcheck (tests/valgrind/wrap.sh).
WRAP = os.environ.get("OS_TEST_WRAP", "").split()
failures = 0


def check(ok, what):
    global failures
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures += 1


def run(*args, stdin=None):
    p = subprocess.run([*WRAP, EXE, *args], capture_output=True, text=True, stdin=stdin,
                       timeout=600)
    return p.returncode, p.stdout, p.stderr


def pcm16_wav(path, frames, channels=1, rate=48000, mask=None, announce=None, keep=None,
              value=None):
    """A 16-bit PCM WAV: a sine per channel (or value(i, c)), optionally
    WAVE_FORMAT_EXTENSIBLE with a channel mask, a data size that announces
    more frames than present (announce), or cut to keep bytes."""
    data = bytearray()
    for i in range(frames):
        for c in range(channels):
            v = value(i, c) if value else 0.3 * math.sin(2 * math.pi * (300 + 50 * c) * i / rate)
            data += struct.pack("<h", max(-32768, min(32767, int(round(32767 * v)))))
    ba = 2 * channels
    if mask is None:
        fmt = struct.pack("<HHIIHH", 1, channels, rate, rate * ba, ba, 16)
    else:
        guid = struct.pack("<IHH8B", 1, 0, 0x10, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71)
        fmt = struct.pack("<HHIIHH", 0xFFFE, channels, rate, rate * ba, ba, 16)
        fmt += struct.pack("<HHI", 22, 16, mask) + guid
    size = len(data) if announce is None else announce * ba
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
    body += b"data" + struct.pack("<I", size) + bytes(data)
    out = b"RIFF" + struct.pack("<I", 4 + len(body) - 4 + (size - len(data))) + body
    if keep is not None:
        out = out[:keep]
    with open(path, "wb") as f:
        f.write(out)


def wav_info(path):
    """(format tag, channels, mask or None, frames, samples as floats) of a
    16-bit or float WAV, from its chunks."""
    d = open(path, "rb").read()
    assert d[:4] == b"RIFF" and d[8:12] == b"WAVE", path
    pos, tag, ch, mask, bits, samples = 12, None, 0, None, 16, []
    while pos + 8 <= len(d):
        cid, size = d[pos:pos + 4], struct.unpack("<I", d[pos + 4:pos + 8])[0]
        body = d[pos + 8:pos + 8 + size]
        if cid == b"fmt ":
            tag, ch = struct.unpack("<HH", body[:4])
            bits = struct.unpack("<H", body[14:16])[0]
            if tag == 0xFFFE:
                mask = struct.unpack("<I", body[20:24])[0]
        elif cid == b"data":
            if bits == 16:
                samples = [s / 32768.0 for s in struct.unpack("<%dh" % (len(body) // 2), body)]
            else:
                samples = list(struct.unpack("<%df" % (len(body) // 4), body))
        pos += 8 + size + (size & 1)
    return tag, ch, mask, len(samples) // max(ch, 1), samples


def container(path):
    """The container a file is, from its magic number."""
    d = open(path, "rb").read(64)
    if d[:4] == b"RIFF" and d[8:12] == b"WAVE":
        return "wav"
    if d[:4] == b"fLaC":
        return "flac"
    if d[:4] == b"OggS":
        return "opus" if b"OpusHead" in d else "vorbis" if b"\x01vorbis" in d else "ogg"
    if d[:4] == b"FORM" and d[8:12] in (b"AIFF", b"AIFC"):
        return "aiff"
    if d[:4] == b"caff":
        return "caf"
    if d[:4] == b"riff" and d[16:20] == b"wave" or d[:4] == b"riff":
        return "w64"
    if d[:4] == b"RF64":
        return "rf64"
    if d[:4] == b".snd":
        return "au"
    if d[:3] == b"ID3" or (d[0] == 0xFF and (d[1] & 0xE0) == 0xE0):
        return "mp3"
    # the older formats' magic numbers, as their specifications give them
    # (from memory: Creative's VOC header text, IFF's FORM with 8SVX or 16SV,
    # NIST SPHERE's NIST_1A, Ensoniq PAF's " paf"/"fap ", AVR's "2BIT")
    if d[:20] == b"Creative Voice File\x1a":
        return "voc"
    if d[:4] == b"FORM" and d[8:12] in (b"8SVX", b"16SV"):
        return "svx"
    if d[:8] == b"NIST_1A\n":
        return "nist"
    if d[:4] in (b" paf", b"fap "):
        return "paf"
    if d[:4] == b"2BIT":
        return "avr"
    return "unknown"


t = tempfile.mkdtemp(prefix="outstage-outputs-")
os.chdir(t)
pcm16_wav("in.wav", 4800)


def listing():
    return sorted(os.listdir("."))


def refused(status, pattern, *args):
    """The run fails with @p status, one line naming @p pattern, and nothing
    in the folder changes."""
    before = {n: open(n, "rb").read() if os.path.isfile(n) else None for n in listing()}
    rc, _, err = run(*args)
    after = {n: open(n, "rb").read() if os.path.isfile(n) else None for n in listing()}
    ok = rc == status and pattern in err and err.count("\n") == 1 and before == after
    check(ok, "%s: exit %d (want %d), %s" % (" ".join(args), rc, status, err.strip()))


# 1. Two outputs that are one file: by name, ./, $PWD, ../dir, symlink, hard link.
os.mkdir("sub")
for rep in ["./new.wav", os.path.join(t, "new.wav"), "sub/../new.wav"]:
    refused(2, "choose another report", "render", "opamp", "in.wav", "new.wav", "--report", rep)
os.symlink("new.wav", "alias.wav")  # dangling: new.wav does not exist yet
refused(2, "choose another report", "render", "opamp", "in.wav", "alias.wav", "--report",
        "new.wav")
pcm16_wav("old.wav", 10)
os.link("old.wav", "hard.wav")
refused(2, "choose another report", "render", "opamp", "in.wav", "old.wav", "--report",
        "hard.wav")
refused(2, "is the input file", "render", "opamp", "in.wav", "sub/../in.wav")
os.remove("alias.wav")
os.remove("hard.wav")
os.remove("old.wav")

# 2. Devices, FIFOs, links, modes. As root, a private device node stands in for
# /dev/null (made with mknod: a regression must not replace the system's).
null, full = "/dev/null", "/dev/full"
if os.geteuid() == 0:
    try:
        os.mknod("null", 0o666 | stat.S_IFCHR, os.makedev(1, 3))
        os.mknod("full", 0o666 | stat.S_IFCHR, os.makedev(1, 7))
        open("null", "wb").close()  # a container may forbid opening new nodes
        null, full = os.path.join(t, "null"), os.path.join(t, "full")
    except OSError as e:
        print("note: no private device nodes here (%s): the system's are used" % e)
rc, out, err = run("render", "opamp", "in.wav", null, "--report", "r.json", "--quiet")
check(rc == 0 and stat.S_ISCHR(os.stat(null).st_mode) and os.path.isfile("r.json"),
      "render to %s: exit %d, still a character device, report written (%s)" % (null, rc,
                                                                                err.strip()))
rc, out, err = run("render", "opamp", "in.wav", full, "--quiet")
check(rc == 1 and stat.S_ISCHR(os.stat(full).st_mode) and "No space left" in err,
      "render to %s: exit %d, still a character device (%s)" % (full, rc, err.strip()))
os.remove("r.json")

os.mkfifo("pipe")
got = {}


def reader():
    with open("pipe", "rb") as f:
        got["data"] = f.read()


th = threading.Thread(target=reader, daemon=True)
th.start()
rc, out, err = run("render", "opamp", "in.wav", "pipe", "--quiet")
th.join(20)
with open("piped.wav", "wb") as f:
    f.write(got.get("data", b""))
ok = rc == 0 and stat.S_ISFIFO(os.stat("pipe").st_mode) and container("piped.wav") == "wav"
check(ok and wav_info("piped.wav")[3] == 4800,
      "render to a FIFO: exit %d, still a FIFO, the reader got a whole WAV (%s)" % (rc,
                                                                                  err.strip()))
os.remove("pipe")
os.remove("piped.wav")

# Standard output into a pipe, named as /dev/stdout names it (a link to
# /proc/self/fd/1; a private link, so that a regression cannot replace the
# system's /dev/stdout): written in place through the link; the summary line
# goes to stderr, not into the audio.
os.symlink("/proc/self/fd/1", "stdout")
p = subprocess.run([*WRAP, EXE, "render", "opamp", "in.wav", "stdout", "--quiet"],
                   capture_output=True, timeout=600)
with open("piped.wav", "wb") as f:
    f.write(p.stdout)
check(p.returncode == 0 and container("piped.wav") == "wav" and wav_info("piped.wav")[3] == 4800,
      "render to /dev/stdout through a pipe gives a whole WAV on stdout (%s)" %
      p.stderr.decode().strip())
check(os.path.islink("stdout"), "the link to standard output is still a link")
os.remove("piped.wav")
os.remove("stdout")

pcm16_wav("target.wav", 10)
os.symlink("target.wav", "link.wav")
rc, _, err = run("render", "opamp", "in.wav", "link.wav", "--quiet")
check(rc == 0 and os.path.islink("link.wav") and wav_info("target.wav")[3] == 4800,
      "render through a symbolic link: still a link, its target rewritten (%s)" % err.strip())

pcm16_wav("mode.wav", 10)
os.chmod("mode.wav", 0o640)
rc, _, _ = run("render", "opamp", "in.wav", "mode.wav", "--quiet")
check(rc == 0 and stat.S_IMODE(os.stat("mode.wav").st_mode) == 0o640,
      "a replaced file keeps mode 640: %o" % stat.S_IMODE(os.stat("mode.wav").st_mode))
pcm16_wav("locked.wav", 10)
os.chmod("locked.wav", 0o444)
refused(1, "write-protected", "render", "opamp", "in.wav", "locked.wav")
rc, _, err = run("render", "opamp", "in.wav", "locked.wav", "--quiet", "--force")
check(rc == 0 and wav_info("locked.wav")[3] == 4800 and
      stat.S_IMODE(os.stat("locked.wav").st_mode) == 0o444,
      "--force replaces a write-protected file and keeps mode 444 (%s)" % err.strip())

# 3. Truncated input: the header announces 388949 frames, 24989 are there.
pcm16_wav("trunc.wav", 24989, channels=1, announce=388949)
rc, _, err = run("render", "opamp", "trunc.wav", "t_out.wav", "--quiet")
check(rc == 0 and "trunc.wav" in err and "388949" in err and "24989" in err,
      "a truncated WAV is named with both counts: %s" % err.strip())

# Hostile files: zero-length, a malformed fmt chunk, a huge data size, a
# header alone, many channels; an output past the file size limit (as a full
# disk fails a write) and a pipe whose reader leaves: one line naming the
# file, a non-zero exit where it failed, nothing half-written.
open("zero.wav", "wb").close()
refused(1, "zero.wav", "render", "opamp", "zero.wav", "h_out.wav")
d = bytearray(open("in.wav", "rb").read())
d[20:22] = struct.pack("<H", 0x1234)  # an unknown format tag
open("corrupt.wav", "wb").write(bytes(d))
refused(1, "corrupt.wav", "render", "opamp", "corrupt.wav", "h_out.wav")
d = bytearray(open("in.wav", "rb").read())
d[40:44] = struct.pack("<I", 0xFFFFFFF0)  # the data chunk's size
open("huge.wav", "wb").write(bytes(d))
rc, _, err = run("render", "opamp", "huge.wav", "h_out.wav", "--quiet")
check(rc == 0 and "huge.wav" in err and "truncated" in err and wav_info("h_out.wav")[3] == 4800,
      "a huge data size renders what is there, with a warning: %s" % err.strip())
open("hdr.wav", "wb").write(open("in.wav", "rb").read()[:44])
rc, _, err = run("render", "opamp", "hdr.wav", "h_out.wav", "--quiet")
check(rc == 0 and "hdr.wav" in err and "4800" in err and wav_info("h_out.wav")[3] == 0,
      "a header alone gives an empty file, with a warning: %s" % err.strip())
pcm16_wav("many.wav", 50, channels=300)
rc, _, err = run("render", "opamp", "many.wav", "h_out.wav", "--quiet")
check(rc == 0 and wav_info("h_out.wav")[1] == 300, "300 channels: exit %d %s" % (rc, err.strip()))
os.remove("h_out.wav")
import resource  # noqa: E402


def small_files():
    resource.setrlimit(resource.RLIMIT_FSIZE, (4000, 4000))


before = listing()
p = subprocess.run([*WRAP, EXE, "render", "opamp", "in.wav", "big.wav", "--quiet"],
                   capture_output=True, text=True, preexec_fn=small_files, timeout=600)
check(p.returncode == 1 and "big.wav" in p.stderr and listing() == before,
      "past the file size limit: exit %d, nothing left: %s" % (p.returncode, p.stderr.strip()))
os.mkfifo("gone")
quit_early = subprocess.Popen(["head", "-c", "100", "gone"], stdout=subprocess.DEVNULL)
pcm16_wav("long.wav", 96000)  # the spool goes out at the end, past the 100 bytes read
rc, _, err = run("render", "opamp", "long.wav", "gone", "--quiet")
try:
    quit_early.wait(20)
except subprocess.TimeoutExpired:  # the FIFO was replaced: nobody ever writes it
    quit_early.kill()
check(rc == 1 and "gone" in err and err.count("\n") == 1,
      "a pipe whose reader left: exit %d, %s" % (rc, err.strip()))
os.remove("gone")
os.remove("long.wav")

# 4. Channel layouts: 7.1 (0x63f) and 5.1 side (0x60f).
for mask, ch in [(0x63F, 8), (0x60F, 6)]:
    pcm16_wav("layout.wav", 480, channels=ch, mask=mask)
    rc, _, err = run("render", "opamp", "layout.wav", "layout_out.wav", "--quiet")
    info = wav_info("layout_out.wav") if rc == 0 else (None, 0, None, 0, [])
    check(info[2] == mask and info[1] == ch,
          "channel mask 0x%x kept: got %s" % (mask, hex(info[2]) if info[2] else info[2]))

# 5. The container from the extension.
for ext, want in [("aif", "aiff"), ("aiff", "aiff"), ("flac", "flac"), ("ogg", "vorbis"),
                  ("opus", "opus"), ("caf", "caf"), ("w64", "w64"), ("rf64", "rf64"),
                  ("au", "au"), ("mp3", "mp3"), ("WAV", "wav"), ("voc", "voc"), ("nist", "nist"),
                  ("sph", "nist"), ("paf", "paf"), ("avr", "avr"), ("8svx", "svx"), ("svx", "svx"),
                  ("iff", "svx")]:
    rc, _, err = run("render", "opamp", "in.wav", "x." + ext, "--quiet")
    got = container("x." + ext) if rc == 0 else "exit %d: %s" % (rc, err.strip())
    check(got == want, "x.%s is %s: %s" % (ext, want, got))
refused(2, "unknown audio extension", "render", "opamp", "in.wav", "x.txt")
# IFF 8SVX holds one channel (libsndfile's format check): a stereo file is refused.
pcm16_wav("stereo.wav", 480, channels=2)
refused(1, "cannot write IFF", "render", "opamp", "stereo.wav", "x2.8svx")
# An input of no frames (found by fuzz/fuzz_cli.c): libsndfile writes FLAC and
# MP3 headers with the first frames and an Opus stream that does not decode, so
# those are refused and nothing is left; the containers that can be empty are
# written empty and read back (checked here by the tool reading its own output).
pcm16_wav("empty.wav", 0)
for ext in ["flac", "mp3", "opus"]:
    refused(1, "holds no frames", "render", "opamp", "empty.wav", "e." + ext, "--quiet")
for ext in ["wav", "aiff", "caf", "w64", "ogg", "voc", "nist", "paf", "avr"]:
    rc, _, err = run("render", "opamp", "empty.wav", "e." + ext, "--quiet")
    rc2, _, err2 = run("render", "opamp", "e." + ext, "back.wav", "--quiet")
    check(rc == 0 and rc2 == 0 and wav_info("back.wav")[3] == 0,
          "an empty input into e.%s: exit %d, read back: exit %d %s" % (ext, rc, rc2,
                                                                      (err + err2).strip()))
# AIFF in a one-byte encoding with an odd number of sample bytes (found by
# fuzz/fuzz_cli.c): libsndfile 1.2.0 counted the chunk's pad byte in the SSND
# chunk's size and, for one channel, as one more frame, which read back as an
# extra last sample (a u-law 0 byte: -0.98 of full scale). The IFF rule (EA
# IFF 85, Apple's AIFF 1.3; from memory): a chunk's size excludes its pad
# byte, the FORM's size includes it; COMM holds the number of frames.
def ulaw_wav(path, frames, channels, tag):
    data = bytes([0x9F]) * (frames * channels)
    fmt = struct.pack("<HHIIHHH", tag, channels, 8000, 8000 * channels, channels, 8, 0)
    body = (b"WAVEfmt " + struct.pack("<I", len(fmt)) + fmt + b"data" +
            struct.pack("<I", len(data)) + data + b"\0" * (len(data) & 1))
    open(path, "wb").write(b"RIFF" + struct.pack("<I", len(body)) + body)


def aiff_chunks(path):
    d = open(path, "rb").read()
    chunks, pos = {}, 12
    while pos + 8 <= len(d):
        cid, size = d[pos:pos + 4], struct.unpack(">I", d[pos + 4:pos + 8])[0]
        chunks[cid] = (pos, size)
        pos += 8 + size + (size & 1)
    return d, chunks


for tag, law in [(7, "u-law"), (6, "A-law")]:
    for frames, ch in [(29, 1), (1, 1), (29, 3), (30, 1)]:
        ulaw_wav("law.wav", frames, ch, tag)
        rc, _, err = run("render", "opamp", "law.wav", "law.aiff", "--quiet")
        d, c = aiff_chunks("law.aiff") if rc == 0 else (b"", {})
        form = struct.unpack(">I", d[4:8])[0] if rc == 0 else -1
        comm = struct.unpack(">I", d[c[b"COMM"][0] + 10:][:4])[0] if b"COMM" in c else -1
        ssnd = c[b"SSND"][1] if b"SSND" in c else -1
        rc2, _, _ = run("render", "opamp", "law.aiff", "back.wav", "--quiet", "--report", "r.json")
        back = json.load(open("r.json"))["input_frames"] if rc2 == 0 else -1
        check(rc == 0 and form == len(d) - 8 and ssnd == 8 + frames * ch and comm == frames and
              back == frames,
              "%s AIFF, %d frames x %d: FORM %d of %d, SSND %d (want %d), COMM %d, read back %d" %
              (law, frames, ch, form, len(d) - 8, ssnd, 8 + frames * ch, comm, back))
rc, _, err = run("measure", "opamp", "--from", "-10", "--to", "-10", "--wav", "m.flac")
check(rc == 0 and container("m.flac") == "flac", "measure --wav m.flac writes FLAC")
refused(2, "unknown audio extension", "measure", "opamp", "--wav", "m.txt")

# 6. Numbers: decimal only, spaces trimmed, one range rule, one exit code.
for value in ["0x10", "0x1p3", "inf", "nan", "1e400", "1,5", ""]:
    refused(2, "load", "measure", "opamp", "--set", "load=" + value)
for value in [" 16", "16 ", " 16 ", "1.6e1", "+16"]:
    rc, out, err = run("measure", "opamp", "--set", "load=" + value, "--json", "--step", "24")
    check(rc == 0 and json.loads(out)["settings"]["load"] == 16,
          "--set 'load=%s' is 16: exit %d %s" % (value, rc, err.strip()))
refused(2, "--rate", "measure", "opamp", "--rate", "44100.5")
refused(2, "--rate", "measure", "opamp", "--rate", "0x1p3")
refused(2, "--level", "plot", "opamp", "spectrum", "x.png", "--level", "61")
refused(2, "--to", "measure", "opamp", "--to", "61")
refused(2, "--seconds", "demo", "demo_dir", "--seconds", "2")
refused(2, "--jobs", "demo", "demo_dir", "--jobs", "1.5")
rc, _, _ = run("measure", "opamp", "--to", " -10 ", "--from", "-10")
check(rc == 0, "--to ' -10 ' is taken: exit %d" % rc)

# 7. Impossible combinations: said on stderr and in the report.
rc, _, err = run("render", "opamp", "in.wav", "c.wav", "--quiet", "--set", "rail=1.5", "--set",
                 "headroom=5", "--report", "c.json")
rep = json.load(open("c.json")) if rc == 0 else {}
check(rc == 0 and "rail=1.5" in err and "headroom=5" in err and
      any("headroom" in w for w in rep.get("warnings", [])),
      "rail=1.5 headroom=5 is said on stderr and in the report: %s" % err.strip())
rc, _, err = run("render", "opamp", "in.wav", "c.wav", "--quiet", "--report", "c.json")
check(rc == 0 and json.load(open("c.json")).get("warnings") == [] and "warning" not in err,
      "the defaults warn of nothing")

# 8. Length and alignment: files of 1 to 1000 frames keep their length; the
# default output equals the plugin's stream (--stream) of the input followed by
# `latency` frames of silence, from frame `latency` on (a Gaussian pulse, so the
# tail carries signal).
for n in [1, 5, 10, 11, 1000]:
    pcm16_wav("n.wav", n)
    rc, _, _ = run("render", "opamp", "n.wav", "n_out.wav", "--quiet")
    rc2, _, _ = run("render", "opamp", "n.wav", "n_str.wav", "--quiet", "--stream")
    check(rc == 0 and rc2 == 0 and wav_info("n_out.wav")[3] == n and wav_info("n_str.wav")[3] == n,
          "a file of %d frames comes out %d frames long (stream %d)" %
          (n, wav_info("n_out.wav")[3] if rc == 0 else -1,
           wav_info("n_str.wav")[3] if rc2 == 0 else -1))
n = 200


def pulse(i, c):
    return 0.5 * math.exp(-0.5 * ((i - 190) / 3.0) ** 2)


pcm16_wav("p.wav", n, value=pulse)
rc, out, _ = run("render", "opamp", "p.wav", "p_out.wav", "--quiet", "--report", "p.json")
lat = json.load(open("p.json")).get("latency_frames", 0) if rc == 0 else 0
pcm16_wav("p_pad.wav", n + lat, value=lambda i, c: pulse(i, c) if i < n else 0.0)
rc2, _, _ = run("render", "opamp", "p_pad.wav", "p_str.wav", "--quiet", "--stream")
a, b = wav_info("p_out.wav")[4], wav_info("p_str.wav")[4][lat:]
check(rc == 0 and rc2 == 0 and lat > 0 and len(a) == n and a == b and max(map(abs, a[-20:])) > 0.01,
      "the default output is the stream shifted by the latency (%d frames), tail included" % lat)

# 9. The circuit's own peak load voltage beside the file's: into 32 ohm at
# the current limit, Ohm's law ties it to the peak load current.
pcm16_wav("loud.wav", 4800, value=lambda i, c: 0.95 * math.sin(2 * math.pi * 1000 * i / 48000))
rc, _, err = run("render", "opamp", "loud.wav", "l_out.wav", "--quiet", "--set", "load=32",
                 "--report", "l.json")
ch = json.load(open("l.json"))["channels"][0] if rc == 0 else {}
v, i, f = ch.get("peak_load_v", 0), ch.get("peak_current_a", 0), ch.get("output_peak_load_v", 0)
check(rc == 0 and v > 0 and abs(v / 32.0 - i) <= 1e-6 * i and f > 0,
      "peak_load_v %.4g V = peak_current_a %.4g A x 32 ohm; the file's peak %.4g V" % (v, i, f))

print("%d failure(s)" % failures)
sys.exit(1 if failures else 0)
