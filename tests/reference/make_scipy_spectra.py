"""Make the scipy reference fixture for the averaged-spectra tests of tapmodes.

What it makes (all next to this script):
  scipy_signals.csv          header "x,y", 2048 rows: the synthetic force x and
                             response y that every spectrum below is computed from.
  scipy_spectra_boxcar.csv   129 rows of averaged spectra with a boxcar window.
  scipy_spectra_hann.csv     the same with a periodic (DFT-even) Hann window.
  Spectra CSV header:
    freq_hz,pxx,pyy,pxy_re,pxy_im,coherence,h1_re,h1_im,h2_re,h2_im

Reference values come from scipy 1.11.4 (scipy.signal.welch, csd, coherence,
get_window, lfilter) on numpy 1.26.4 (numpy.random.default_rng), Python 3.11.
Pinned versions, exactly:
    numpy==1.26.4
    scipy==1.11.4

Regenerate (from any working directory; outputs land beside this script):
    pip install numpy==1.26.4 scipy==1.11.4
    python3 tests/reference/make_scipy_spectra.py

Signals (deterministic, seed 20261201, numpy.random.default_rng):
  fs = 1000.0 Hz, nperseg = 256, noverlap = 0, 8 segments -> 2048 samples.
  x = rng.standard_normal(2048)                      (white, std 1.0; "force")
  n = 0.3 * rng.standard_normal(2048)                (drawn after x; independent)
  resonator: pole radius r = 0.97 at f0 = 120 Hz,
      w0 = 2 pi f0 / fs,  a = [1, -2 r cos(w0), r^2],
      b = [G * |a[0] + a[1] e^(-j w0) + a[2] e^(-2 j w0)|],  G = 4
      (b scales the filter to gain |H| = 4 at exactly 120 Hz; its DC gain is
      about 0.31 and its Nyquist gain about 0.048, so the 0.3-std noise makes
      coherence clearly lower away from the resonance)
  y = scipy.signal.lfilter(b, a, x) + n             (zero initial state; "response")

Spectra (scipy.signal, window w = get_window(name, 256), which is periodic /
DFT-even by scipy's default fftbins=True; detrend=False; scaling='density';
one-sided; average='mean'):
  f, Pxx = welch(x, fs, window=w, nperseg=256, noverlap=0, detrend=False,
                 scaling='density', return_onesided=True)
  f, Pyy = welch(y, ...same...)
  f, Pxy = csd(x, y, fs, window=w, nperseg=256, noverlap=0, detrend=False,
               scaling='density')
  f, Cxy = coherence(x, y, fs, window=w, nperseg=256, noverlap=0, detrend=False)
  H1 = Pxy / Pxx
  H2 = Pyy / conj(Pxy)

Cross-spectrum convention (checked in the scipy 1.11.4 source,
scipy/signal/_spectral_py.py, _spectral_helper: "result = np.conjugate(result)
* result_y", and re-checked numerically below): Pxy = conj(X) * Y per segment,
averaged, times scale = 1 / (fs * sum(w^2)), doubled at every bin except DC and
Nyquist. With that convention H1 = Pxy/Pxx and H2 = Pyy/conj(Pxy) both estimate
Y/X, and coherence = |Pxy|^2 / (Pxx * Pyy).
"""

from pathlib import Path

import numpy as np
import scipy
import scipy.signal as sig

PINNED_NUMPY = "1.26.4"
PINNED_SCIPY = "1.11.4"

SEED = 20261201
FS = 1000.0
NPERSEG = 256
NSEG = 8
N = NPERSEG * NSEG
NOISE_STD = 0.3
F0 = 120.0
R = 0.97
PEAK_GAIN = 4.0
WINDOWS = ("boxcar", "hann")

OUT_DIR = Path(__file__).resolve().parent

SPECTRA_HEADER = "freq_hz,pxx,pyy,pxy_re,pxy_im,coherence,h1_re,h1_im,h2_re,h2_im"


def resonator():
    w0 = 2.0 * np.pi * F0 / FS
    a = np.array([1.0, -2.0 * R * np.cos(w0), R * R])
    a_at_f0 = a[0] + a[1] * np.exp(-1j * w0) + a[2] * np.exp(-2j * w0)
    b = np.array([PEAK_GAIN * abs(a_at_f0)])
    return b, a


def make_signals():
    rng = np.random.default_rng(SEED)
    x = rng.standard_normal(N)
    noise = NOISE_STD * rng.standard_normal(N)
    b, a = resonator()
    y = sig.lfilter(b, a, x) + noise
    return x, y


def manual_spectra(x, y, w):
    """Independent numpy re-computation, used only to check scipy's conventions."""
    xs = x.reshape(NSEG, NPERSEG) * w
    ys = y.reshape(NSEG, NPERSEG) * w
    X = np.fft.rfft(xs, axis=1)
    Y = np.fft.rfft(ys, axis=1)
    scale = 1.0 / (FS * np.sum(w * w))
    pxx = np.mean(np.abs(X) ** 2, axis=0) * scale
    pyy = np.mean(np.abs(Y) ** 2, axis=0) * scale
    pxy = np.mean(np.conj(X) * Y, axis=0) * scale
    for p in (pxx, pyy, pxy):
        p[1:-1] *= 2.0
    return pxx, pyy, pxy


def spectra(x, y, name):
    w = sig.get_window(name, NPERSEG)  # fftbins=True: periodic / DFT-even
    common = dict(window=w, nperseg=NPERSEG, noverlap=0, detrend=False)
    f, pxx = sig.welch(x, FS, scaling="density", return_onesided=True, **common)
    _, pyy = sig.welch(y, FS, scaling="density", return_onesided=True, **common)
    _, pxy = sig.csd(x, y, FS, scaling="density", **common)
    _, cxy = sig.coherence(x, y, FS, **common)
    h1 = pxy / pxx
    h2 = pyy / np.conj(pxy)

    # Self-checks of the conventions stated in the docstring.
    m_pxx, m_pyy, m_pxy = manual_spectra(x, y, w)
    np.testing.assert_allclose(pxx, m_pxx, rtol=1e-12, atol=0)
    np.testing.assert_allclose(pyy, m_pyy, rtol=1e-12, atol=0)
    np.testing.assert_allclose(pxy, m_pxy, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(cxy, np.abs(pxy) ** 2 / (pxx * pyy), rtol=1e-12)
    assert len(f) == NPERSEG // 2 + 1
    np.testing.assert_allclose(f, np.arange(NPERSEG // 2 + 1) * FS / NPERSEG)

    table = np.column_stack(
        [f, pxx, pyy, pxy.real, pxy.imag, cxy, h1.real, h1.imag, h2.real, h2.imag]
    )
    return table


def write_csv(path, header, table):
    with open(path, "w", newline="\n") as fh:
        fh.write(header + "\n")
        for row in table:
            fh.write(",".join("%.17g" % v for v in row) + "\n")


def main():
    if np.__version__ != PINNED_NUMPY or scipy.__version__ != PINNED_SCIPY:
        raise SystemExit(
            "need numpy==%s scipy==%s, found numpy %s scipy %s"
            % (PINNED_NUMPY, PINNED_SCIPY, np.__version__, scipy.__version__)
        )

    x, y = make_signals()
    write_csv(OUT_DIR / "scipy_signals.csv", "x,y", np.column_stack([x, y]))
    print("wrote scipy_signals.csv: %d rows" % N)

    for name in WINDOWS:
        t = spectra(x, y, name)
        fname = "scipy_spectra_%s.csv" % name
        write_csv(OUT_DIR / fname, SPECTRA_HEADER, t)

        f, pxx, coh = t[:, 0], t[:, 1], t[:, 5]
        h1 = np.abs(t[:, 6] + 1j * t[:, 7])
        h2 = np.abs(t[:, 8] + 1j * t[:, 9])
        assert np.all(coh >= 0.0) and np.all(coh <= 1.0), "coherence out of [0, 1]"
        assert np.all(h2 >= h1 * (1.0 - 1e-12)), "|H2| < |H1| somewhere"
        k = int(np.argmax(h1))
        assert abs(f[k] - F0) <= FS / NPERSEG, "|H1| peak not near %g Hz" % F0
        print(
            "wrote %s: %d rows; |H1| peak %.4g at %.4g Hz; coherence min %.4f "
            "max %.6f; mean Pxx %.5g (white std 1 -> 2/fs = %.3g)"
            % (fname, len(f), h1[k], f[k], coh.min(), coh.max(), pxx[1:-1].mean(), 2.0 / FS)
        )


if __name__ == "__main__":
    main()
