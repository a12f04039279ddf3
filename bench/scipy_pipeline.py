"""The tapmodes pipeline re-done in numpy/scipy, for a side-by-side speed comparison.

Steps, as tapmodes does them (the figures are not meant to match to the digit; the
trigger here is simpler):
  1. read the WAV (channel 0 force, channel 1 response unless told otherwise), remove
     each channel's baseline (median of the first 0.2 s);
  2. trigger on the force channel at 10 x its noise RMS, pre-trigger 0.01 s, record 1 s,
     hold-off 0.2 s after each record;
  3. windows: force window flat to 5 ms after the trigger then a 2 ms half-cosine taper;
     exponential window exp(-(t - t_trig) / tau) on both channels, 0.1 at the record end;
  4. per hit, one-sided spectra of the zero-padded (x2) records, summed over hits:
     Gff, Gxx, Gfx (csd/welch-style averaging, one segment per hit);
  5. H1 = Gfx / Gff and coherence |Gfx|^2 / (Gff Gxx);
  6. peak pick: local maxima of 20 log10 |H1 / f| (mobility, for an accelerometer)
     in 20 Hz .. 0.4 fs with scipy.signal.find_peaks, prominence >= 6 dB.

Run (Python is never needed by the tests; numpy 1.26.4 and scipy 1.11.4 pinned):
    pip install numpy==1.26.4 scipy==1.11.4
    tapmodes simulate --taps 20 --out sim.wav
    python3 bench/scipy_pipeline.py sim.wav --repeat 5
and time the same file with `tapmodes analyze sim.wav --out sim.json`.
The script prints the peaks and the best wall time of the analysis over the repeats
(reading the file is timed separately).
"""

import argparse
import time

import numpy as np
from scipy.io import wavfile
from scipy.signal import find_peaks


def read(path, force_ch, resp_ch):
    fs, data = wavfile.read(path)
    data = data.astype(np.float64)
    if data.ndim == 1:
        raise SystemExit("need a force and a response channel")
    return float(fs), data[:, force_ch], data[:, resp_ch]


def hits(force, fs, pre_s=0.01, rec_s=1.0, hold_s=0.2, multiple=10.0):
    """Start indices of the records: first crossing of the threshold, then hold-off."""
    lead = int(0.2 * fs)
    base = np.median(force[:lead])
    dev = np.abs(force - base)
    noise = np.sqrt(np.mean((force[:lead] - base) ** 2))
    above = np.flatnonzero(dev > multiple * max(noise, 1e-12))
    pre, rec, hold = int(pre_s * fs), int(rec_s * fs), int(hold_s * fs)
    starts, next_ok = [], 0
    for i in above:
        if i < next_ok:
            continue
        s = i - pre
        if s >= 0 and s + rec <= force.size:
            starts.append(s)
        next_ok = i + rec - pre + hold
    return starts, pre, rec


def windows(n, pre, fs, force_s=0.005, taper_s=0.002, exp_end=0.1):
    i = np.arange(n, dtype=np.float64)
    flat_end = pre + force_s * fs
    taper = max(taper_s * fs, 1.0)
    w = np.where(i <= flat_end, 1.0, 0.0)
    mid = (i > flat_end) & (i < flat_end + taper)
    w[mid] = 0.5 * (1.0 + np.cos(np.pi * (i[mid] - flat_end) / taper))
    span = max(n - 1 - pre, 1) / fs
    tau = span / -np.log(exp_end)
    e = np.exp(-((i - pre) / fs) / tau)
    return w * e, e


def analyse(fs, force, resp):
    lead = int(0.2 * fs)
    force = force - np.median(force[:lead])
    resp = resp - np.median(resp[:lead])
    starts, pre, rec = hits(force, fs)
    wf, wx = windows(rec, pre, fs)
    nfft = 2 * rec
    gff = gxx = gfx = 0.0
    for s in starts:
        f_spec = np.fft.rfft(force[s : s + rec] * wf, nfft) / fs
        x_spec = np.fft.rfft(resp[s : s + rec] * wx, nfft) / fs
        gff = gff + np.abs(f_spec) ** 2
        gxx = gxx + np.abs(x_spec) ** 2
        gfx = gfx + np.conj(f_spec) * x_spec
    freqs = np.fft.rfftfreq(nfft, 1.0 / fs)
    h1 = gfx / np.maximum(gff, np.finfo(float).tiny)
    coh = np.abs(gfx) ** 2 / np.maximum(gff * gxx, np.finfo(float).tiny)
    band = (freqs >= 20.0) & (freqs <= 0.4 * fs)
    db = 20.0 * np.log10(np.maximum(np.abs(h1[band]) / freqs[band], 1e-300))
    idx, props = find_peaks(db, prominence=6.0)
    fb = freqs[band]
    return len(starts), fb[idx], props["prominences"], coh[band][idx]


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("wav")
    ap.add_argument("--force-channel", type=int, default=0)
    ap.add_argument("--response-channel", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    t0 = time.perf_counter()
    fs, force, resp = read(a.wav, a.force_channel, a.response_channel)
    t_read = time.perf_counter() - t0
    best = float("inf")
    for _ in range(max(a.repeat, 1)):
        t0 = time.perf_counter()
        n, peaks, prom, coh = analyse(fs, force, resp)
        best = min(best, time.perf_counter() - t0)
    print(f"{a.wav}: {n} records, fs {fs:g} Hz, {force.size / fs:.1f} s")
    for f, p, c in zip(peaks, prom, coh):
        print(f"  peak {f:9.2f} Hz  prominence {p:5.1f} dB  coherence {c:.3f}")
    print(f"read {t_read * 1e3:.1f} ms, analysis best of {a.repeat}: {best * 1e3:.1f} ms")


if __name__ == "__main__":
    main()
