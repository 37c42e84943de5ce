#!/usr/bin/env python3
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
"""Writes the seed inputs of both harnesses into fuzz/seeds/<harness>/.

stage/: small host programs in fuzz_stage.c's encoding (see its op_* and
pick_* functions). cli/: fuzz_cli.c's layout (flag, input-name, output-name
and report bytes, a 16-bit length, the command line with NUL between
arguments, the file) around tiny audio files made by sox (WAV, AIFF, AU, 8SVX,
VOC, FLAC) and by this script (a 32-bit float WAV). Run it from the
repository root when an encoding changes; the seeds are kept in git. Seeds
that fuzzing found worth keeping (they are not written here) stay as they are."""

import os
import struct
import subprocess
import sys
import tempfile

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "seeds")

# --- fuzz_stage ----------------------------------------------------------

P = {n: i for i, n in enumerate(
    "enable fullscale drive gain rail headroom ilimit load gbw slew oversample "
    "listen trim beta vbe bias emitter_r loop".split())}
RATES = [8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400,
         192000, 352800, 384000]
# indices into fuzz_special[] (fuzz_data.h)
SP = {"0": 0, "1": 2, "-1": 3, "1000": 6, "1e30": 9, "sub": 15, "inf": 21, "-inf": 22, "nan": 23}


class Prog:
    def __init__(self, kind, rate, head=0, seed=12345):
        self.b = bytearray([kind | head, RATES.index(rate)]) + struct.pack("<I", seed)
        self.b.append(0)  # no settings before the first block

    def set(self, name, value):
        """Set a parameter to a float (raw bits), or an invalid id when name is an int."""
        pid = name if isinstance(name, int) else P[name]
        self.b += bytes([0, pid, 1]) + struct.pack("<f", value)

    def set_special(self, name, sp):
        self.b += bytes([0, P[name], 0, SP[sp]])

    def reset(self):
        self.b.append(5)

    def block(self, n, gen, amp_exp=0, extra=b"", special=None, in_place=0):
        """A block of n frames (n < 8193) from generator gen with amplitude 10^(amp_exp/10),
        amp_exp even, or a special value."""
        self.b += bytes([6, 2]) + struct.pack("<H", n) + bytes([in_place, gen])
        if special is None:
            self.b.append(amp_exp & 0xFE)  # even: amplitude 10^(int8/10)
        else:
            self.b += bytes([1, SP[special]])
        self.b += extra


def stage_seeds():
    out = {}
    p = Prog(0, 48000, head=8)  # op-amp clipping, then the residual
    p.set("drive", 36.0)
    p.block(2048, 1, 0, b"\x0a")
    p.set("listen", 1.0)
    p.block(1024, 3, 0)
    out["opamp-clip-listen"] = p
    p = Prog(1, 44100)  # class B crossover on a quiet sine, outside the loop
    p.set("loop", 0.0)
    p.block(4096, 1, -20, b"\x10")
    out["pushpull-crossover"] = p
    p = Prog(1, 96000, head=8)  # current limit into 1 ohm at 16x
    p.set("oversample", 16.0)
    p.set("load", 1.0)
    p.set("ilimit", 200.0)
    p.set("beta", 500.0)
    p.block(1024, 5, 30, b"\x08")
    out["pushpull-1ohm-16x"] = p
    p = Prog(0, 8000)  # 1x, special values strewn in, a reset
    p.set("oversample", 1.0)
    p.block(512, 4, 0, b"\x03", in_place=1)
    p.reset()
    p.block(512, 0, 0, struct.pack("<4f", float("nan"), float("inf"), 1e30, -1e30) * 128)
    out["opamp-1x-hostile"] = p
    p = Prog(1, 384000)  # high rails, full bias, no emitter resistor, bypass toggles
    for name, v in (("rail", 60.0), ("headroom", 0.0), ("bias", 2.0), ("emitter_r", 0.0)):
        p.set(name, v)
    p.block(700, 5, 10, b"\x20")
    p.set("enable", 0.0)
    p.block(300, 5, 10, b"\x20")
    p.set("enable", 1.0)
    p.block(500, 3, 10)
    out["pushpull-384k-bias"] = p
    p = Prog(0, 22050, head=8)  # automation: settings between small blocks
    for i in range(40):
        p.set(["drive", "gain", "rail", "trim", "slew", "gbw"][i % 6], [30.0, 40.0, 1.5, 24.0, 0.1, 0.1][i % 6])
        p.block(1 + 7 * i % 60, 1, 0, b"\x30")
    out["opamp-automation"] = p
    p = Prog(1, 48000, head=2 | 8)  # out-of-range values, NaN, inf, unknown ids
    p.set_special("drive", "nan")
    p.set_special("rail", "inf")
    p.set_special("load", "-inf")
    p.set("fullscale", 1e30)
    p.set("oversample", 3.0)
    p.set(31, 1.0)
    p.block(0, 7, 0)
    p.block(2000, 2, 0, special="1e30")
    p.block(100, 2, 0, special="sub")
    out["pushpull-out-of-range"] = p
    p = Prog(0, 176400)  # every oversampling factor in turn
    for f in (1.0, 2.0, 4.0, 8.0, 16.0):
        p.set("oversample", f)
        p.block(200, 3, 0)
    out["opamp-factors"] = p
    return out


# --- fuzz_cli --------------------------------------------------------------

IN_EXTS = ["wav", "aiff", "aif", "flac", "au", "snd", "caf", "w64", "ogg", "oga", "rf64", "voc",
           "sf", "paf", "mat", "xi", "htk", "nist", "avr", "sds", "wve", "mpc", "iff", "svx",
           "raw", "txt", "WAV", ""]


def cli_input(flags, in_ext, out_byte, rep_byte, argv, data):
    line = b"\0".join(a.encode() for a in argv)
    return (bytes([flags, IN_EXTS.index(in_ext), out_byte, rep_byte]) + struct.pack("<H", len(line))
            + line + data)


def sox_file(fmt, args):
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "x." + fmt)
        subprocess.run(["sox", "-n", "-R"] + args + [path, "synth", "0.004", "sine", "440", "vol", "0.9"],
                       check=True)
        with open(path, "rb") as f:
            return f.read()


def wav_float(frames=64, channels=2, rate=48000):
    import math
    data = b"".join(struct.pack("<" + "f" * channels, *[0.9 * math.sin(0.3 * i + c) for c in range(channels)])
                    for i in range(frames))
    fmt = struct.pack("<HHIIHH", 3, channels, rate, rate * 4 * channels, 4 * channels, 32)
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", len(data)) + data
    return b"RIFF" + struct.pack("<I", len(body)) + body


def flac_file():
    with tempfile.TemporaryDirectory() as d:
        wav = os.path.join(d, "x.wav")
        with open(wav, "wb") as f:
            f.write(sox_file("wav", ["-r", "8000", "-c", "1", "-b", "16"]))
        flac = os.path.join(d, "x.flac")
        try:
            subprocess.run(["sox", wav, flac], check=True, capture_output=True)
        except subprocess.CalledProcessError:
            return None
        with open(flac, "rb") as f:
            return f.read()


def cli_seeds():
    out = {}
    wav16 = sox_file("wav", ["-r", "8000", "-c", "1", "-b", "16"])
    out["render-wav16"] = cli_input(0, "wav", 0, 1, ["render", "opamp", "in.wav", "out.wav"], wav16)
    out["render-float-stereo"] = cli_input(
        1 | 8, "wav", 0, 1,
        ["render", "pushpull", "in.wav", "out.wav", "--set", "bias=1.1", "--set", "oversample=1",
         "--report", "r.json", "--compensate"], wav_float())
    out["render-aiff24"] = cli_input(0, "aiff", 1 + 7 * 2, 0,
                                     ["render", "opamp", "a.aiff", "b.flac", "--preset", "line-driver"],
                                     sox_file("aiff", ["-r", "11025", "-c", "2", "-b", "24"]))
    out["render-au-ulaw"] = cli_input(4, "au", 2, 0, ["render", "opamp", "x", "y", "--set=drive=36"],
                                      sox_file("au", ["-r", "16000", "-c", "1", "-e", "u-law"]))
    out["render-8svx"] = cli_input(0, "svx", 0, 0, ["render", "pushpull", "x", "y"],
                                   sox_file("8svx", ["-r", "8000", "-c", "1", "-b", "8"]))
    out["render-voc"] = cli_input(0, "voc", 0, 3, ["render", "opamp", "x", "y"],
                                  sox_file("voc", ["-r", "8000", "-c", "1", "-b", "16"]))
    flac = flac_file()
    if flac:
        out["render-flac"] = cli_input(0, "flac", 0, 0, ["render", "opamp", "in.flac", "out.flac",
                                                           "--set", "load=8", "--set", "ilimit=200"], flac)
    out["render-to-input"] = cli_input(0, "wav", 3, 0, ["render", "opamp", "a", "a"], wav16)
    out["measure"] = cli_input(0, "", 0, 0, ["measure", "pushpull", "--freq", "1000", "--json", "--from",
                                             "-40", "--to", "6", "--step", "0.5"], b"")
    out["plot"] = cli_input(0, "", 0, 0, ["plot", "opamp", "thd", "x.svg", "--rate", "96000", "--level",
                                          "-3"], b"")
    out["demo"] = cli_input(0, "", 0, 0, ["demo", "dir", "--seconds", "3", "--jobs", "2"], b"")
    out["help"] = cli_input(0, "", 0, 0, ["--help"], b"")
    out["bad-set"] = cli_input(0, "wav", 0, 0, ["render", "opamp", "x", "y", "--set", "rail=1e999",
                                                "--set", "oversample=3", "--set", "latency=1", "--"], wav16)
    out["raw-bytes"] = cli_input(0, "raw", 0, 0, ["render"], bytes(range(256)))
    return out


def write(harness, seeds):
    d = os.path.join(ROOT, harness)
    os.makedirs(d, exist_ok=True)
    for name, data in seeds.items():
        if isinstance(data, Prog):
            data = bytes(data.b)
        with open(os.path.join(d, name), "wb") as f:
            f.write(data)
    print(f"{d}: {len(seeds)} seeds", file=sys.stderr)


if __name__ == "__main__":
    write("stage", stage_seeds())
    write("cli", cli_seeds())
