#!/usr/bin/python3
"""The reference a practitioner would write with SciPy from Debian packages, timed by perf.c.

usage: scipy_reference.py RECORD.wav PULSE.f64 K
  RECORD.wav : mono float WAV (the response)
  PULSE.f64  : the reference pulse, raw little-endian float64
  K          : threshold in MAD sigmas

Reads the record (scipy.io.wavfile), correlates with scipy.signal.correlate(x, s, mode="valid"
padded to full length, method="fft"), normalises by the pulse energy, takes find_peaks on |r| with
height K * 1.4826 * MAD(r) and distance len(pulse), refines each peak by a parabola through the
three samples around it, and prints one line: the elapsed seconds (read to refined peaks, imports
excluded) and the refined lags.
"""
import sys
import time
import warnings

import numpy as np
import scipy.io.wavfile
import scipy.signal


def main():
    path, pulse_path, k = sys.argv[1], sys.argv[2], float(sys.argv[3])
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        # libsndfile's PEAK chunk is not one scipy reads: it says so and skips it
        warnings.simplefilter("ignore", scipy.io.wavfile.WavFileWarning)
        _, x = scipy.io.wavfile.read(path)
    x = np.asarray(x, dtype=np.float64)
    s = np.fromfile(pulse_path, dtype="<f8")
    # r[k] = sum_j x[k+j] s[j] / E_s, zero beyond the record (as strandecho's xcorr.h)
    r = scipy.signal.correlate(x, s, mode="full", method="fft")[len(s) - 1:] / np.dot(s, s)
    a = np.abs(r)
    med = np.median(r)
    sigma = 1.4826 * np.median(np.abs(r - med))
    peaks, _ = scipy.signal.find_peaks(a, height=k * sigma, distance=len(s))
    lags = []
    for p in peaks:
        if 0 < p < len(a) - 1:
            y0, y1, y2 = a[p - 1], a[p], a[p + 1]
            den = y0 - 2.0 * y1 + y2
            lags.append(p + (0.5 * (y0 - y2) / den if den != 0.0 else 0.0))
        else:
            lags.append(float(p))
    t1 = time.perf_counter()
    print("%.6f %s" % (t1 - t0, " ".join("%.4f" % v for v in lags)))


if __name__ == "__main__":
    main()
