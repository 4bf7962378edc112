"""Independent forward model of a line for the locator's tests (NumPy, Debian's python3-numpy).

A frequency-domain transfer model, derived separately from the C lattice simulator: looking into
interface k (coefficient r for a wave arriving from the sensor side, -r from the far side,
transmissions 1 + r and 1 - r), with the rest of the line beyond it reflecting G (referred to the
interface), the reflection seen from the near side is

    R_k = r + (1 + r)(1 - r) G / (1 + r G)

and G for interface k is R_{k+1} delayed by the two-way travel time of the segment between them.
At the sensor, the down-going wave D = P + r_s U and the up-going wave U = R D, so the sensor sees
P + (1 + r_s) U with U = R P / (1 - r_s R). Delays act as exp(-i w tau) on the spectrum, so echo
times need not fall on samples. Every multiple is included. All coefficients are in the convention
of the recorded quantity.
"""
import numpy as np


def hann_pulse(rate, duration):
    n = int(np.floor(duration * rate)) + 1
    t = np.arange(n) / rate
    return 0.5 * (1.0 - np.cos(2.0 * np.pi * t / duration))


def gauss_pulse(rate, duration):
    n = int(np.floor(duration * rate)) + 1
    t = np.arange(n) / rate - duration / 2.0
    sigma = duration / 8.0
    return np.exp(-0.5 * (t / sigma) ** 2)


def response(pulse, rate, n, t0, interfaces, source_r=0.0, loss_np_per_s=0.0, pad=8):
    """Sensor trace of length n: pulse injected at t0 seconds; interfaces = [(one_way_s, r), ...]
    in increasing time, the last one the far end. Returns (trace, injected)."""
    nfft = 1
    while nfft < pad * n:
        nfft *= 2
    p = np.zeros(nfft)
    p[: len(pulse)] = pulse
    P = np.fft.rfft(p)
    w = 2.0 * np.pi * np.fft.rfftfreq(nfft, 1.0 / rate)
    times = [t for t, _ in interfaces]
    coefs = [r for _, r in interfaces]
    R = np.zeros_like(P)
    for k in range(len(interfaces) - 1, -1, -1):
        r = coefs[k]
        if k == len(interfaces) - 1:
            R = np.full_like(P, r)
        else:
            seg = times[k + 1] - times[k]
            G = R * np.exp(-2j * w * seg - 2.0 * loss_np_per_s * seg)
            R = r + (1.0 + r) * (1.0 - r) * G / (1.0 + r * G)
    R = R * np.exp(-2j * w * times[0] - 2.0 * loss_np_per_s * times[0])
    U = R * P / (1.0 - source_r * R)
    S = (P + (1.0 + source_r) * U) * np.exp(-1j * w * t0)
    trace = np.fft.irfft(S, nfft)[:n]
    inj = np.fft.irfft(P * np.exp(-1j * w * t0), nfft)[:n]
    return trace, inj
