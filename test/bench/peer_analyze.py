#!/usr/bin/env python3
"""Peer for the benchmark: the same job as `turnwise analyze`, written the plain numpy/scipy way.

Reads a float32 WAV (volts), finds tach rising edges with linear interpolation, resamples each
revolution to 256 points with np.interp, averages, takes order vectors by FFT, converts to
velocity (divide by 2 pi f, phase + 90), and computes the 10-1000 Hz velocity r.m.s. from a Welch
spectrum (Hann, no overlap). Prints JSON. Used only by `npm run bench` to compare speed.
Usage: peer_analyze.py REC.wav TACH_CHANNEL SENSITIVITY_MV_PER_G
"""
import json
import sys

import numpy as np
from scipy.io import wavfile
from scipy.signal import welch

G = 9.80665


def main():
    path, tach_ch, sens = sys.argv[1], int(sys.argv[2]), float(sys.argv[3])
    fs, data = wavfile.read(path, mmap=True)
    data = np.asarray(data, dtype=np.float64)
    tach = data[:, tach_ch]
    above = tach >= 2.5
    idx = np.nonzero(~above[:-1] & above[1:])[0]
    frac = (2.5 - tach[idx]) / (tach[idx + 1] - tach[idx])
    edges = idx + frac
    M = 256
    k = G * 1000 / (sens / 1000)
    out = {"channels": []}
    periods = np.diff(edges)
    out["speed_rpm"] = float(60 * fs / periods.mean())
    grid = (edges[:-1, None] + np.arange(M)[None, :] / M * periods[:, None]).ravel()
    n = np.arange(data.shape[0])
    f_rev = fs / periods.mean()
    nseg = 1 << int(np.ceil(np.log2(fs / 1.0)))
    for c in range(data.shape[1]):
        if c == tach_ch:
            continue
        a = (data[:, c] - data[:, c].mean()) * k
        revs = np.interp(grid, n, a).reshape(-1, M).mean(axis=0)
        spec = np.fft.rfft(revs) * 2 / M
        orders = {}
        for o in (1, 2, 3):
            amp = abs(spec[o]) / (2 * np.pi * o * f_rev)
            phase = (-np.degrees(np.angle(spec[o])) + 90) % 360
            orders[str(o)] = {"amp_pk_mm_s": float(amp), "phase_deg": float(phase)}
        f, p = welch(a, fs=fs, window="hann", nperseg=nseg, noverlap=0, detrend=False, scaling="spectrum")
        band = (f >= 10) & (f <= 1000)
        # Power spectrum per line -> velocity, summed with the Hann noise bandwidth (1.5 lines) taken out.
        v2 = p[band] / (2 * np.pi * f[band]) ** 2 / 1.5
        out["channels"].append({"channel": c, "overall_rms_mm_s": float(np.sqrt(v2.sum())), "orders": orders})
    print(json.dumps(out))


if __name__ == "__main__":
    main()
