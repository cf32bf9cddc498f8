#!/usr/bin/python3
"""Plain numpy ePIE on a streaking scan: the speed reference of docs/performance.md.

ePIE (A. M. Maiden and J. M. Rodenburg, Ultramicroscopy 109, 1256 (2009)) applied to a
streaking trace with one central momentum, i.e. the gate is a free complex function of time
(M. Lucchini et al., Opt. Express 23, 29502 (2015)): for each delay tau, in random order,
  psi = E(t) G(t + tau);  Psi = FFT psi;  Psi <- sqrt(I(tau, w)) Psi / |Psi|;  psi' = IFFT Psi
  E += beta  conj(G(t + tau)) / max|G|^2 (psi' - psi)
  G(t + tau) += alpha conj(E) / max|E|^2 (psi' - psi)
The time step is the delay step / `sub` so that every delay is a whole number of samples; the
measured rows are interpolated once onto the FFT's energy bins (linear). No background model,
no weights: the plain algorithm. Prints the wall time of the iterations and the retrieved
intensity FWHM; the last two lines give its CPU and wall seconds.

usage: numpy_epie.py SIDECAR.json [iterations=150] [n_fft=512]
Reads the CSV image named by the sidecar (rows = delays).
"""
import json
import os
import sys
import time

import numpy as np

HARTREE_EV = 27.211386245988  # CODATA 2018
AU_TIME_FS = 2.4188843265857e-2  # CODATA 2018


def main():
    sidecar = sys.argv[1]
    iterations = int(sys.argv[2]) if len(sys.argv) > 2 else 150
    n = int(sys.argv[3]) if len(sys.argv) > 3 else 512
    meta = json.load(open(sidecar))
    image = os.path.join(os.path.dirname(sidecar), meta["image"])
    counts = np.loadtxt(image, delimiter=",", ndmin=2)
    e_ax = meta["energy_eV"]
    d_ax = meta["delay_fs"]
    W = e_ax["first"] + e_ax["step"] * np.arange(e_ax["count"])  # eV
    nd = d_ax["count"]
    dtau = d_ax["step"] / AU_TIME_FS  # a.u.

    # Time grid: dt = dtau / sub with n * dw covering the energy window.
    span_au = (W[-1] - W[0]) / HARTREE_EV
    sub = max(1, int(np.ceil(dtau * span_au * 1.25 / (2 * np.pi))))
    dt = dtau / sub
    dw_eV = 2 * np.pi / (n * dt) * HARTREE_EV
    Wc = 0.5 * (W[0] + W[-1])
    w_bins = Wc + (np.arange(n) - n // 2) * dw_eV  # fftshift order
    # Measured amplitudes on the FFT bins (fft order), zero outside the measured window.
    I = np.empty((nd, n))
    for i in range(nd):
        I[i] = np.interp(w_bins, W, np.maximum(counts[i], 0.0), left=0.0, right=0.0)
    amp = np.sqrt(np.fft.ifftshift(I, axes=1))

    # Initial guess: delay-averaged spectrum, flat phase; gate = 1.
    E = np.fft.ifft(amp.mean(axis=0)) * n
    E /= np.abs(E).max()
    ng = n + sub * (nd - 1)
    G = np.ones(ng, dtype=complex)
    rng = np.random.default_rng(1)

    t_start = time.perf_counter()
    c_start = time.process_time()
    for _ in range(iterations):
        for i in rng.permutation(nd):
            sl = slice(sub * i, sub * i + n)
            g = G[sl]
            psi = E * g
            Psi = np.fft.fft(psi)
            Psi = amp[i] * np.exp(1j * np.angle(Psi))
            diff = np.fft.ifft(Psi) - psi
            E_old = E.copy()
            E = E + np.conj(g) / np.max(np.abs(g) ** 2) * diff
            G[sl] = g + np.conj(E_old) / np.max(np.abs(E_old) ** 2) * diff
    seconds = time.perf_counter() - t_start
    cpu_seconds = time.process_time() - c_start

    # Relative rms misfit of the moduli (outside the timing).
    mis = 0.0
    for i in range(nd):
        mis += np.sum((np.abs(np.fft.fft(E * G[sub * i:sub * i + n])) - amp[i]) ** 2)
    misfit = np.sqrt(mis / np.sum(amp ** 2))

    # Intensity FWHM of E (samples above half maximum x dt, linear edges).
    p = np.abs(E) ** 2
    k = int(np.argmax(p))
    h = p[k] / 2
    lo = k
    while lo > 0 and p[lo - 1] >= h:
        lo -= 1
    hi = k
    while hi < n - 1 and p[hi + 1] >= h:
        hi += 1
    left = lo - 1 + (h - p[lo - 1]) / (p[lo] - p[lo - 1]) if lo > 0 else lo
    right = hi + (p[hi] - h) / (p[hi] - p[hi + 1]) if hi < n - 1 else hi
    fwhm_as = (right - left) * dt * AU_TIME_FS * 1000
    print(f"numpy ePIE: {iterations} iterations x {nd} delays, n = {n}, dt = {dt:.3f} a.u.: "
          f"{seconds:.3f} s (FWHM {fwhm_as:.0f} as, rms modulus misfit {misfit:.3f})")
    print(f"cpu_seconds {cpu_seconds:.6f}")
    print(f"seconds {seconds:.6f}")


if __name__ == "__main__":
    main()
