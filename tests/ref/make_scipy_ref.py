#!/usr/bin/python3
"""Write SciPy reference vectors for tests/test_scipy_ref.c into fixtures/ref/.

Run from the source tree root with Debian's python3-scipy:
    /usr/bin/python3 tests/ref/make_scipy_ref.py

Outputs (plain text, one value per line, %.17g, '#' comment header):
  scipy_xcorr_pulse.txt  the reference pulse s (Gaussian, w = 2 samples, +-8 w)
  scipy_xcorr_input.txt  x: four echoes of s (both signs, fractional delays) plus seeded Gaussian noise
  scipy_xcorr_r.txt      r[k] = c[k + m - 1] / E_s, k = 0..n-1, where
                         c = scipy.signal.correlate(x, s, mode="full", method="fft"), E_s = sum s^2
  scipy_peaks.txt        "height H" then the indices of scipy.signal.find_peaks(|r|, height=H)
"""
import os
import sys

import numpy as np
import scipy
import scipy.signal

W = 2.0
HALF = 16
N = 2000
SEED = 1993
NOISE = 0.01
HEIGHT = 0.05
ECHOES = [(300.0, 1.0), (712.4, -0.6), (1180.5, 0.35), (1633.25, -0.2)]  # (start lag, amplitude)

COMMAND = "/usr/bin/python3 tests/ref/make_scipy_ref.py"


def gauss(t):
    return np.exp(-t * t / (2.0 * W * W))


def write(path, values, what):
    with open(path, "w") as f:
        f.write("# %s\n" % what)
        f.write("# regenerate: %s (scipy %s, numpy %s)\n" % (COMMAND, scipy.__version__, np.__version__))
        for v in values:
            f.write("%.17g\n" % v)


def main():
    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    out = os.path.join(root, "fixtures", "ref")
    os.makedirs(out, exist_ok=True)
    j = np.arange(2 * HALF + 1, dtype=float)
    s = gauss(j - HALF)
    m = s.size
    t = np.arange(N, dtype=float)
    rng = np.random.default_rng(SEED)
    x = rng.normal(0.0, NOISE, N)
    for lag, amp in ECHOES:
        x += amp * gauss(t - lag - HALF)
    es = float(np.sum(s * s))
    c = scipy.signal.correlate(x, s, mode="full", method="fft")
    r = c[m - 1:m - 1 + N] / es
    peaks, _ = scipy.signal.find_peaks(np.abs(r), height=HEIGHT)

    write(os.path.join(out, "scipy_xcorr_pulse.txt"), s,
          "Gaussian pulse exp(-t^2/(2 w^2)), w = %g samples, t = -%d..%d" % (W, HALF, HALF))
    write(os.path.join(out, "scipy_xcorr_input.txt"), x,
          "x: echoes %s of the pulse + N(0, %g^2) noise, numpy default_rng(%d)" % (ECHOES, NOISE, SEED))
    write(os.path.join(out, "scipy_xcorr_r.txt"), r,
          "r[k] = scipy.signal.correlate(x, s, mode='full', method='fft')[k + m - 1] / sum(s^2)")
    with open(os.path.join(out, "scipy_peaks.txt"), "w") as f:
        f.write("# scipy.signal.find_peaks(abs(r), height=H): first line the height, then the indices\n")
        f.write("# regenerate: %s (scipy %s, numpy %s)\n" % (COMMAND, scipy.__version__, np.__version__))
        f.write("height %.17g\n" % HEIGHT)
        for p in peaks:
            f.write("%d\n" % p)
    print("wrote %d samples, %d peaks to %s" % (N, len(peaks), out))
    return 0


if __name__ == "__main__":
    sys.exit(main())
