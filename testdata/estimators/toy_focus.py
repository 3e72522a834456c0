#!/usr/bin/env python3
"""A toy external estimator for `celerity bench` (docs/bench.md).

Usage: python3 toy_focus.py ACQUISITION_FOLDER

It reads the acquisition folder (acquisition.yaml and the .npy arrays) and
prints one JSON object, {"speed_mps": ...}, on stdout. It needs numpy only:
instead of a YAML library it picks the few keys it uses out of the manifest
with regular expressions, which works on the manifests celerity writes (one
key per line, `linear: {count: N, pitch_m: P}` on one line) but is not a YAML
reader; for manifests from elsewhere use a YAML parser (PyYAML).

The method is a toy, shown for the protocol and not for its accuracy: for
each assumed speed c it delays the analytic signals of the plane-wave
events to pixels on three vertical lines, compounds the events, and takes
the coherence factor, sum |sum_j a_j|^2 over
sum N sum_j |a_j|^2, pooled over the pixels; the speed with the largest
value (refined by a parabola) is the answer. Anything it cannot handle ends
with a message on stderr and a non-zero exit status, which the benchmark
records as a failure of this estimator on that case.
"""
import json
import re
import sys
from pathlib import Path

import numpy as np


def fail(msg):
    print(f"toy_focus: {msg}", file=sys.stderr)
    sys.exit(2)


def key(text, name, default=None):
    m = re.search(rf"^\s*{name}:\s*([^\s#]+)", text, re.M)
    if m:
        return m.group(1).strip("\"'")
    if default is None:
        fail(f"acquisition.yaml: no {name}")
    return default


def main():
    if len(sys.argv) != 2:
        fail("usage: toy_focus.py ACQUISITION_FOLDER")
    folder = Path(sys.argv[1])
    text = (folder / "acquisition.yaml").read_text()
    m = re.search(r"linear:\s*\{\s*count:\s*(\d+),\s*pitch_m:\s*([0-9.eE+-]+)\s*\}", text)
    if not m:
        fail("only linear arrays written as 'linear: {count: N, pitch_m: P}'")
    n, pitch = int(m.group(1)), float(m.group(2))
    f0 = float(key(text, "center_frequency_hz"))
    fs = float(key(text, "sampling_rate_hz"))
    t0 = float(key(text, "start_time_s", "0"))
    kind = key(text, "kind")
    fd = float(key(text, "demodulation_frequency_hz", "0"))
    data = np.load(folder / key(text, "file"))                  # [E][N][S]
    delays = np.load(folder / key(text, "delays_file"))         # [E][N], s
    ns = data.shape[2]
    if kind == "iq":
        # back to the analytic signal: iq(t) exp(+j 2 pi fd t), t absolute
        t = t0 + np.arange(ns) / fs
        data = data * np.exp(2j * np.pi * fd * t)
    else:
        # analytic signal of the RF by the FFT method
        h = np.zeros(ns)
        h[0] = 1
        h[1 : (ns + 1) // 2] = 2
        if ns % 2 == 0:
            h[ns // 2] = 1
        data = np.fft.ifft(np.fft.fft(data, axis=-1) * h, axis=-1)
    x = (np.arange(n) - (n - 1) / 2) * pitch                     # element positions, m

    # plane-wave events: firing delays linear in x, d = d0 + slope x
    events = []
    for e in range(delays.shape[0]):
        slope, d0 = np.polyfit(x, delays[e], 1)
        if np.max(np.abs(delays[e] - (d0 + slope * x))) < 0.01 / f0:
            events.append((e, slope, d0))
    if not events:
        fail("no plane-wave events (this toy handles plane waves only)")

    depth = 0.5 * 1540.0 * (t0 + data.shape[2] / fs)
    zs = np.arange(0.2 * depth, 0.8 * depth, 1540.0 / f0 / 2)
    px = np.repeat([-2e-3, 0.0, 2e-3], len(zs))
    pz = np.tile(zs, 3)
    active = np.abs(px[:, None] - x[None, :]) <= pz[:, None] / 2  # receive F-number 1
    samples = np.arange(data.shape[2])

    def coherence(c):
        summed = np.zeros((len(px), n), dtype=complex)
        for e, slope, d0 in events:
            s = np.clip(c * slope, -0.99, 0.99)                  # sin(theta) at speed c
            t_tx = d0 + (px * s + pz * np.sqrt(1 - s * s)) / c
            t = t_tx[:, None] + np.hypot(px[:, None] - x[None, :], pz[:, None]) / c
            idx = (t - t0) * fs
            for j in range(n):
                summed[:, j] += np.interp(idx[:, j], samples, data[e, j].real)
                summed[:, j] += 1j * np.interp(idx[:, j], samples, data[e, j].imag)
        a = np.where(active, summed, 0)
        num = np.sum(np.abs(a.sum(axis=1)) ** 2)
        den = np.sum(active.sum(axis=1) * np.sum(np.abs(a) ** 2, axis=1))
        return num / den

    speeds = np.arange(1400.0, 1652.0, 5.0)
    values = np.array([coherence(c) for c in speeds])
    k = int(np.argmax(values))
    best = speeds[k]
    if 0 < k < len(speeds) - 1:                                   # parabola through the peak
        y0, y1, y2 = values[k - 1 : k + 2]
        den = y0 - 2 * y1 + y2
        if den < 0:
            best += 0.5 * (y0 - y2) / den * 5.0
    print(json.dumps({"speed_mps": float(best)}))


if __name__ == "__main__":
    main()
