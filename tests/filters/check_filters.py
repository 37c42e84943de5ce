#!/usr/bin/python3
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
"""The oversampling filters checked by an outside computation.

dump_filters (C, linked with the DSP library) prints the taps of every
half-band stage as the library designs them, and for every factor the reported
latency and the impulse response of the whole round trip. This script, run by
Debian's python3 with numpy and scipy, checks them independently of the
library's own code (tests/dsp/test_oversampler.c uses the library's DTFT):

 1. each stage is a half-band FIR (odd length, symmetric, 1/2 at the centre,
    zeros at every other even offset from it: Vaidyanathan, Multirate Systems
    and Filter Banks, 1993, sec. 4.6), so its delay is exactly (N - 1) / 2;
 2. its response by scipy.signal.freqz: passband ripple <= 0.001 dB over the
    kept band 0 .. 0.42 fs (host rate; 20.16 kHz at 48 kHz), and >= 99 dB of
    attenuation over the band it must reject, from 2^(j-1) fs - 0.42 fs to its
    Nyquist frequency (the first image of the kept band; os_oversampler.c's
    design comment, Crochiere and Rabiner, Multirate Digital Signal
    Processing, 1983, ch. 5);
 3. the whole cascade for each factor: round-trip passband ripple <= 0.001 dB,
    and every frequency at the top rate that folds into the kept band on its
    way down (an alias for the decimator; by transposition the same
    frequencies are the interpolator's images of the kept band, with the same
    product of stage responses) attenuated by >= 99 dB;
 4. the reported latency equals the delay the taps imply, rounded up to whole
    host frames; the library's impulse response equals the round trip rebuilt
    here with scipy.signal.upfirdn plus that rounding delay; and the measured
    delay of that impulse response (its peak, its symmetry and
    scipy.signal.group_delay over the kept band) equals the reported latency;
 5. the compensation of the band-limited sampling (dsp/os_window.h): the
    chain's response to a tone, rebuilt here from that header's model (node
    values exact, the inner TR-BDF2 value the Lagrange cubic of the input,
    slopes from the TR-BDF2 relations, two cubic Hermite pieces per step
    integrated against the triangle), times the three-tap compensation with
    the library's coefficient: its ripple over the kept band is the least
    that scipy.optimize.minimize_scalar finds for any coefficient (within
    1e-6 dB), and at most 0.02 dB at 2x, 0.001 dB from 4x up.

Usage: check_filters.py DUMP_FILTERS_EXECUTABLE. Exit status 77 (meson: skip)
when numpy or scipy is missing (Debian: python3-numpy, python3-scipy).
"""

import os
import subprocess
import sys

try:
    import numpy as np
    from scipy import signal
except ImportError as err:
    print(f"SKIP: {err}; install the Debian packages python3-numpy python3-scipy")
    sys.exit(77)

# Requirements (issue 4 and os_oversampler.h): kept band as a share of the host
# rate, largest passband ripple, smallest stopband attenuation.
PASSBAND = 0.42
MAX_RIPPLE_DB = 0.001
MIN_STOP_DB = 99.0
# Dense frequency grids: the narrowest stopband lobe of an N-tap filter is
# about 1/N cycles per sample wide; thousands of points per band find each
# lobe's peak to far better than 0.1 dB.
POINTS = 20001

failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def read_dump(path):
    # Under `meson test --setup valgrind` it runs under memcheck (tests/valgrind/wrap.sh).
    wrap = os.environ.get("OS_TEST_WRAP", "").split()
    out = subprocess.run([*wrap, path], check=True, stdout=subprocess.PIPE, text=True).stdout
    stages, factors, info = {}, {}, {}
    for line in out.splitlines():
        f = line.split()
        if f[0] == "stage":
            j, n = int(f[1]), int(f[2])
            stages[j] = np.array([float(v) for v in f[3:]])
            assert len(stages[j]) == n, line[:40]
        elif f[0] == "window":
            info.setdefault("window", {})[int(f[1])] = float(f[2])
        elif f[0] == "factor":
            fac, lat, m = int(f[1]), int(f[2]), int(f[3])
            factors[fac] = (lat, np.array([float(v) for v in f[4:]]))
            assert len(factors[fac][1]) == m, line[:40]
        else:
            info[f[0]] = float(f[1])
    return stages, factors, info


def db(x):
    return 20.0 * np.log10(np.maximum(np.abs(x), 1e-300))


def response(h, f):
    """Complex response of FIR h at f cycles per sample (scipy.signal.freqz)."""
    _, H = signal.freqz(h, 1, worN=np.asarray(f, dtype=float), fs=1.0)
    return H


def check_stage(j, h):
    n = len(h)
    c = (n - 1) // 2
    sym = np.max(np.abs(h - h[::-1]))
    offsets = np.arange(n) - c
    zeros = np.max(np.abs(h[(offsets % 2 == 0) & (offsets != 0)]))
    check(
        n % 4 == 3 and sym < 1e-15 and h[c] == 0.5 and zeros == 0.0,
        f"stage {j}: {n} taps, half-band (symmetric within {sym:.1e}, "
        f"centre {h[c]}, even offsets {zeros})",
    )
    pass_edge = PASSBAND / 2**j
    stop_edge = 0.5 - pass_edge
    ripple = np.max(np.abs(db(response(h, np.linspace(0.0, pass_edge, POINTS)))))
    stop = np.max(db(response(h, np.linspace(stop_edge, 0.5, POINTS))))
    check(
        ripple <= MAX_RIPPLE_DB,
        f"stage {j}: passband ripple {ripple:.2e} dB over 0 .. {pass_edge:.5f} "
        f"(limit {MAX_RIPPLE_DB} dB)",
    )
    check(
        stop <= -MIN_STOP_DB,
        f"stage {j}: stopband {stop:.2f} dB over {stop_edge:.5f} .. 0.5 "
        f"(limit -{MIN_STOP_DB} dB)",
    )


def fold(f, rate):
    """Frequency f (units of the host rate) after sampling at `rate`."""
    f = np.mod(f, rate)
    return np.where(f > rate / 2, rate - f, f)


def check_cascade(m, stages):
    """Round-trip ripple and alias rejection of factor 2^m."""
    top = 2**m
    f = np.linspace(0.0, PASSBAND, POINTS)
    gain = np.ones_like(f)
    for j in range(1, m + 1):
        gain *= np.abs(response(stages[j], f / 2**j)) ** 2
    ripple = np.max(np.abs(db(gain)))
    check(
        ripple <= MAX_RIPPLE_DB,
        f"factor {top}: round-trip passband ripple {ripple:.2e} dB (limit {MAX_RIPPLE_DB} dB)",
    )
    # Every top-rate frequency, followed down the cascade: the gain of stage j
    # at the frequency it sees, then the fold to half that rate.
    f = np.linspace(0.0, top / 2, POINTS * top)
    phi = f.copy()
    att = np.ones_like(f)
    for j in range(m, 0, -1):
        att *= np.abs(response(stages[j], phi / 2**j))
        phi = fold(phi, 2 ** (j - 1))
    alias = (phi <= PASSBAND) & (f > PASSBAND + 1e-12)
    worst = np.max(db(att[alias]))
    at = f[alias][np.argmax(att[alias])]
    check(
        worst <= -MIN_STOP_DB,
        f"factor {top}: aliases into the kept band (and images of it) at most {worst:.2f} dB, "
        f"worst from {at:.4f} fs (limit -{MIN_STOP_DB} dB)",
    )


def check_latency(fac, lat, r, stages):
    m = fac.bit_length() - 1
    # each stage delays by (N - 1) / 2 samples at its rate 2^j fs, in each
    # direction: (N - 1) 2^(m - j) samples at the top rate for the round trip
    raw = sum((len(stages[j]) - 1) * 2 ** (m - j) for j in range(1, m + 1))
    expect = -(-raw // fac)
    check(
        lat == expect,
        f"factor {fac}: reported latency {lat} frames, taps imply {raw}/{fac} "
        f"= {raw / fac:.3f}, rounded up {expect}",
    )
    # The round trip rebuilt with upfirdn: zero insertion and 2h per stage up,
    # the rounding delay at the top rate, h and every other sample down.
    x = np.zeros(len(r))
    x[0] = 1.0
    for j in range(1, m + 1):
        x = signal.upfirdn(2.0 * stages[j], x, up=2)
    x = np.concatenate([np.zeros(expect * fac - raw), x])
    for j in range(m, 0, -1):
        x = signal.upfirdn(stages[j], x, down=2)
    diff = np.max(np.abs(x[: len(r)] - r))
    check(diff < 1e-12, f"factor {fac}: impulse response equals scipy's rebuild within {diff:.1e}")
    # Measured delay of the library's impulse response.
    peak = int(np.argmax(np.abs(r)))
    k = min(lat, len(r) - 1 - lat)
    asym = np.max(np.abs(r[lat - k : lat] - r[lat + k : lat : -1])) if k > 0 else 0.0
    w = np.linspace(0.0, PASSBAND, 2001)
    _, gd = signal.group_delay((r, [1.0]), w=w, fs=1.0)
    gd_err = np.max(np.abs(gd - lat))
    check(
        peak == lat and asym < 1e-12 and gd_err < 1e-6 and abs(np.sum(r) - 1.0) < 1e-9,
        f"factor {fac}: measured delay: peak at {peak}, symmetric about {lat} within "
        f"{asym:.1e}, group delay {np.min(gd):.9f} .. {np.max(gd):.9f} frames over the "
        f"kept band, DC gain {np.sum(r):.12f}",
    )


def window_response(theta, g):
    """Response of the band-limited sampling to a tone of theta rad per
    oversampled step, the loop fast against the step (os_window.h)."""
    a_ = 1.0 / (g * (2.0 - g))
    b_ = (1.0 - g) ** 2 / (g * (2.0 - g))
    beta = g / 2.0
    x = lambda k: np.exp(1j * theta * k)

    def lagrange(u):  # nodes -2, -1, 0, 1
        return np.array([-(u + 1) * u * (u - 1) / 6, (u + 2) * u * (u - 1) / 2,
                         -(u + 2) * (u + 1) * (u - 1) / 2, (u + 2) * (u + 1) * u / 6])

    def pieces(n0):
        x0, x1 = x(n0), x(n0 + 1)
        xg = np.dot(lagrange(g), [x(n0 - 2), x(n0 - 1), x0, x1])
        f1 = (x1 - a_ * xg + b_ * x0) / beta
        f0 = np.exp(-1j * theta) * f1
        fg = 2.0 * (xg - x0) / g - f0
        return (x0, f0), [(0.0, g, xg, fg), (g, 1.0 - g, x1, f1)]

    total = 0.0
    for n0, rising in ((-1, True), (0, False)):
        (v, dv), ps = pieces(n0)
        for u0, du, v1, dv1 in ps:
            d0, d1 = dv * du, dv1 * du
            m0 = (v + v1) / 2 + (d0 - d1) / 12
            m1 = 0.15 * v + 0.35 * v1 + d0 / 30 - d1 / 20
            i0, i1 = du * m0, du * (u0 * m0 + du * m1)
            total += i1 if rising else i0 - i1
            v, dv = v1, dv1
    return total


def check_window(fac, a, g, passband):
    from scipy.optimize import minimize_scalar
    theta = np.linspace(1e-9, 2 * np.pi * passband / fac, 2000)
    h = np.array([window_response(t, g) for t in theta])

    def ripple(c):
        return np.max(np.abs(db(np.abs(h * (1 + 2 * c * (1 - np.cos(theta)))))))

    best = minimize_scalar(ripple, bounds=(0.0, 0.2), method="bounded", options={"xatol": 1e-10})
    got = ripple(a)
    limit = 0.02 if fac == 2 else 0.001
    check(
        got <= best.fun + 1e-6 and got <= limit,
        f"factor {fac}: band-limited sampling, coefficient {a:.8f}: ripple {got:.6f} dB "
        f"(scipy's least {best.fun:.6f} dB at {best.x:.8f}; limit {limit} dB)",
    )


def main():
    if len(sys.argv) != 2:
        print("usage: check_filters.py DUMP_FILTERS_EXECUTABLE", file=sys.stderr)
        return 2
    stages, factors, info = read_dump(sys.argv[1])
    print(
        f"scipy {__import__('scipy').__version__}, numpy {np.__version__}; the library "
        f"designs for passband {info['passband']} fs and {info['stopband_db']} dB"
    )
    for j in sorted(stages):
        check_stage(j, stages[j])
    for fac in sorted(factors):
        lat, r = factors[fac]
        if fac > 1:
            check_cascade(fac.bit_length() - 1, stages)
        check_latency(fac, lat, r, stages)
    for fac, a in sorted(info.get("window", {}).items()):
        check_window(fac, a, info["trbdf2_g"], info["passband"])
    print(f"{len(failures)} failed" if failures else "all filter checks passed")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
