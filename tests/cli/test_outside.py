#!/usr/bin/python3
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
"""outstage measure and render against an outside computation with numpy and
scipy (Debian's python3-numpy and python3-scipy) on the same files.

measure --json --wav writes the analysed record of every level; here numpy's
FFT and a least-squares sine fit (numpy.linalg.lstsq) recompute from that file:
  - THD per IEC 60268-3 (rms of harmonics 2..20 below 20 kHz over the
    fundamental), from numpy.fft.rfft of the whole-cycle record;
  - THD+N by a different route: fit the fundamental and DC by least squares,
    keep the residual's content in AES17's 20 Hz .. 20 kHz band, divide its rms
    by the fitted fundamental's;
  - the peak load voltage, and the load power of the clean levels by Ohm's law,
    mean(v^2) / R;
  - the clip onset and largest clean power by the definitions in the contract.
render --report: numpy makes the input; the report's meters must equal Ohm's
law on the output file, and its clipped-sample count numpy's count.

Tolerances: the file holds 32-bit floats (relative rounding 6e-8 per sample:
THD and THD+N agree to 1e-4 relative plus 1e-7 absolute); the power meter
integrates the oversampled circuit, the file is band-limited to the host rate,
so power is compared only where THD < 1 % (what lies above 24 kHz is then
under 1e-4 of the power) and to 1e-3.

Usage: test_outside.py OUTSTAGE_EXE
"""

import json
import os
import subprocess
import sys
import tempfile

try:
    import numpy as np
    from scipy.io import wavfile
except ImportError:
    print("numpy or scipy missing (Debian: python3-numpy python3-scipy); skipped")
    sys.exit(77)

EXE = sys.argv[1]
# Under `meson test --setup valgrind` the tool runs under memcheck (tests/valgrind/wrap.sh).
WRAP = os.environ.get("OS_TEST_WRAP", "").split()
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def close(a, b, rel, absolute=0.0):
    return abs(a - b) <= rel * abs(b) + absolute


def run(*args):
    r = subprocess.run([*WRAP, EXE, *args], capture_output=True, text=True, check=False)
    if r.returncode != 0:
        raise SystemExit(f"outstage {' '.join(args)} failed: {r.stderr.strip()}")
    return r.stdout


def outside_figures(v, rate, cycles):
    """THD (IEC 60268-3) by rfft, THD+N by sine fit, both ratios."""
    n = len(v)
    spec = np.abs(np.fft.rfft(v)) / n * np.sqrt(2.0)
    f1 = spec[cycles]
    harm = [spec[k * cycles] for k in range(2, 21) if k * cycles * rate / n <= 20000.0]
    thd = np.sqrt(np.sum(np.square(harm))) / f1
    t = np.arange(n)
    w = 2.0 * np.pi * cycles * t / n
    basis = np.column_stack([np.sin(w), np.cos(w), np.ones(n)])
    coef, *_ = np.linalg.lstsq(basis, v, rcond=None)
    resid = v - basis @ coef
    r = np.fft.rfft(resid)
    freq = np.fft.rfftfreq(n, 1.0 / rate)
    r[(freq < 20.0) | (freq > 20000.0)] = 0.0
    band = np.fft.irfft(r, n)
    fund_rms = np.hypot(coef[0], coef[1]) / np.sqrt(2.0)
    thdn = np.sqrt(np.mean(band * band)) / fund_rms
    return thd, thdn


def measure_case(tmp, stage, sets, freq):
    wav = os.path.join(tmp, f"{stage}.wav")
    args = ["measure", stage, "--json", "--wav", wav, "--freq", str(freq), "--step", "2"]
    for s in sets:
        args += ["--set", s]
    m = json.loads(run(*args))
    rate, x = wavfile.read(wav)
    check(x.dtype == np.float32 and rate == m["sample_rate"], f"{stage}: float WAV at the rate")
    st = m["settings"]
    volts = 10.0 ** (st["gain"] / 20.0) * st["fullscale"]
    load = st["load"]
    n, cycles = m["record_frames"], m["record_cycles"]
    check(len(x) == n * len(m["sweep"]), f"{stage}: one record per level in the file")
    worst = {"thd": 0.0, "thdn": 0.0, "vpk": 0.0, "p": 0.0}
    thds, bad, powers = [], 0, 0
    for i, p in enumerate(m["sweep"]):
        v = x[i * n:(i + 1) * n].astype(np.float64) * volts
        thd, thdn = outside_figures(v, rate, cycles)
        thds.append(thd)
        ok = close(p["thd_percent"] / 100.0, thd, 1e-4, 1e-7)
        ok &= close(p["thdn_percent"] / 100.0, thdn, 1e-4, 1e-7)
        ok &= close(p["vout_peak"], np.max(np.abs(v)), 1e-6)
        if thd > 1e-5:  # above the 32-bit file's rounding floor, relative figures mean something
            worst["thd"] = max(worst["thd"], abs(p["thd_percent"] / 100.0 / thd - 1.0))
            worst["thdn"] = max(worst["thdn"], abs(p["thdn_percent"] / 100.0 / thdn - 1.0))
        worst["vpk"] = max(worst["vpk"], abs(p["vout_peak"] / np.max(np.abs(v)) - 1.0))
        if thd < 0.01:
            ohm = np.mean(v * v) / load
            ok &= close(p["load_power_w"], ohm, 1e-3)
            worst["p"] = max(worst["p"], abs(p["load_power_w"] / ohm - 1.0))
            powers += 1
        if not ok:
            bad += 1
            print(f"     {stage} {p['level_dbfs']} dBFS: tool {p} vs numpy THD {thd:.6g} "
                  f"THD+N {thdn:.6g}")
    print(f"     {stage} at {m['freq_hz']} Hz, {len(thds)} levels ({powers} clean): largest "
          f"relative differences THD {worst['thd']:.2e}, THD+N {worst['thdn']:.2e} (where THD > "
          f"1e-5), peak {worst['vpk']:.2e}, clean power {worst['p']:.2e}")
    check(bad == 0, f"{stage}: THD, THD+N, peak and clean power agree with numpy at every level")
    # The contract's clip onset: the lowest level whose THD reaches 1 %, from
    # which it stays at or above 1 % to the top of the sweep; the largest clean
    # power below it.
    onset = next((i for i in range(len(thds)) if min(thds[i:]) >= 0.01), None)
    want = None if onset is None else m["sweep"][onset]["level_dbfs"]
    got = None if m["clip_onset"] is None else m["clip_onset"]["level_dbfs"]
    check(want == got, f"{stage}: clip onset {got} dBFS, numpy says {want}")
    top = len(thds) if onset is None else onset
    clean = [i for i in range(top) if thds[i] < 0.01]
    want_p = max((m["sweep"][i]["load_power_w"] for i in clean), default=None)
    got_p = None if m["largest_clean"] is None else m["largest_clean"]["load_power_w"]
    check(want_p == got_p, f"{stage}: largest clean power {got_p} W, by definition {want_p}")


def render_case(tmp):
    rate, n = 48000, 48000
    t = np.arange(n) / rate
    x = np.zeros((n, 3), dtype=np.float32)
    x[:, 0] = 0.2 * np.sin(2 * np.pi * 1000.0 * t)  # 0.4 V peak into 32 ohm: clean
    x[:, 2] = 0.9 * np.sin(2 * np.pi * 250.0 * t)   # trimmed +12 dB: over full scale
    src, dst, rep = (os.path.join(tmp, f) for f in ("in.wav", "out.wav", "r.json"))
    wavfile.write(src, rate, x)
    run("render", "opamp", src, dst, "--compensate", "--quiet", "--report", rep,
        "--set", "load=32", "--set", "rail=15")
    r = json.load(open(rep))
    _, y = wavfile.read(dst)
    check(y.dtype == np.float32 and y.shape == x.shape, "render: float in, float out, same shape")
    lat = r["latency_frames"]
    v = y[:, 0].astype(np.float64) * 10.0 ** (6.0 / 20.0)  # G at gain 6 dB, fullscale 1 V
    ch = r["channels"]
    # The meters average over every processed frame: the file's n and the
    # latency's flush (silence in, nothing out).
    ohm = np.sum(v * v) / 32.0 / (n + lat)
    check(close(ch[0]["load_power_w"], ohm, 1e-3),
          f"render: channel 1 load power {ch[0]['load_power_w']:.6g} W, Ohm's law on the file "
          f"{ohm:.6g} W")
    ipk = np.max(np.abs(v)) / 32.0
    # The file's peak sits within 1 - cos(pi f / rate) = 0.2 % of the circuit's.
    check(close(ch[0]["peak_current_a"], ipk, 3e-3),
          f"render: channel 1 peak current {ch[0]['peak_current_a']:.6g} A, file {ipk:.6g} A")
    check(ch[1]["peak_current_a"] == 0.0 and ch[1]["load_power_w"] == 0.0 and
          ch[1]["limiting_percent"] == 0.0, "render: the silent channel meters nothing")
    # Channel 3 is clipped by the stage, not by the file: nothing over 0 dBFS.
    over = int(np.sum(np.abs(y) > 1.0))
    check(r["clipped_samples"] == over and ch[0]["clipped_samples"] == 0,
          f"render: {r['clipped_samples']} samples over full scale, numpy counts {over}")
    run("render", "opamp", src, dst, "--quiet", "--report", rep, "--set", "trim=12",
        "--set", "load=10000", "--set", "rail=15")
    r = json.load(open(rep))
    _, y = wavfile.read(dst)
    over = [int(np.sum(np.abs(y[:, c]) > 1.0)) for c in range(3)]
    check([c["clipped_samples"] for c in r["channels"]] == over and over[2] > 0,
          f"render: trim +12 dB, samples over full scale per channel {over}, report agrees")


def main():
    with tempfile.TemporaryDirectory(prefix="outstage-outside-") as tmp:
        measure_case(tmp, "opamp", ["rail=15"], 1000)
        measure_case(tmp, "pushpull", ["bias=0", "loop=0", "load=8", "gain=12"], 1010)
        measure_case(tmp, "pushpull", ["bias=1.1", "loop=1", "gain=20", "rail=15"], 1010)
        render_case(tmp)
    if failures:
        print(f"{len(failures)} failure(s)")
        sys.exit(1)
    print("all outside checks passed")


main()
