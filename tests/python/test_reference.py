# The library's numerical pieces against general-purpose reference libraries (scipy, numpy):
# each quantity is computed here from its definition, independently of the C++ code paths.
import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate, signal

import streakwright as sw


def au_field_V_per_m():
    return sc.physical_constants["atomic unit of electric field"][0]


# ------------------------------------------------------------------------------------------
# SFA streaking amplitude by direct quadrature (scipy.integrate.quad)
#
#   a(W, tau) = -i Int dt E_X(t - tau) d(p + A(t)) exp(i phi_V(p, t)) exp(i (W + Ip) t),
#   phi_V = -p I1(t) - I2(t)/2,  I1(t) = Int_t^inf A,  I2(t) = Int_t^inf A^2,  p = sqrt(2 W),
#
# (the SFA streaking amplitude: M. Kitzler, N. Milosevic, A. Scrinzi, F. Krausz and T. Brabec,
# Phys. Rev. Lett. 88, 173904 (2002); Y. Mairesse and F. Quere, Phys. Rev. A 71, 011401(R)
# (2005)), constant dipole d = 1, atomic units. Fields as documented in retrieval/
# xuv_builders.h and retrieval/physics/ir_field.h, written out here:
#   E_X(t) = eps(t) exp(-i Omega0 t), eps(t) = (1/2pi) Int dD exp(-D^2/(2 s^2) + i GDD D^2/2 - i D t)
#          = (1/2pi) sqrt(2 pi / a) exp(-t^2 / (2 a)),  a = 1/s^2 - i GDD,  s = 2 sqrt(ln 2)/tl_fwhm
#   (the Gaussian integral, from memory; Fourier sign E ~ exp(-i Omega t) of DESIGN.md);
#   A(t) = -(E0/w) exp(-2 ln2 t^2/fwhm^2) sin(w t + cep), E0 from the cycle-averaged intensity
#   I = c eps0 E0^2 / 2 (SI, CODATA 2018 constants from scipy.constants).

XUV = dict(center_eV=60.0, transform_limited_fwhm_as=200.0, gdd_as2=3000.0)
IP_EV = 21.5645  # Ne 2p (NIST ASD; only needs to be the same number on both sides here)
IR = dict(ir_wavelength_nm=800.0, ir_fwhm_fs=5.0, ir_peak_intensity_Wcm2=2e12, ir_cep_rad=0.3)


def au(value, unit):
    """Boundary units -> atomic units with scipy.constants (CODATA 2018)."""
    hartree_eV = sc.physical_constants["Hartree energy in eV"][0]
    t_au = sc.physical_constants["atomic unit of time"][0]
    return {"eV": value / hartree_eV, "fs": value * 1e-15 / t_au, "as": value * 1e-18 / t_au,
            "as2": value * 1e-36 / t_au**2}[unit]


def reference_amplitude(W_eV, tau_fs):
    w0 = au(XUV["center_eV"], "eV")
    sig = 2.0 * math.sqrt(math.log(2.0)) / au(XUV["transform_limited_fwhm_as"], "as")
    a = 1.0 / sig**2 - 1j * au(XUV["gdd_as2"], "as2")

    def xuv(t):
        return (1.0 / (2 * math.pi)) * np.sqrt(2 * math.pi / a) * np.exp(-t * t / (2 * a)) * np.exp(-1j * w0 * t)

    hc_eVnm = sc.h * sc.c / sc.e * 1e9
    w = au(hc_eVnm / IR["ir_wavelength_nm"], "eV")
    E0 = math.sqrt(2 * IR["ir_peak_intensity_Wcm2"] * 1e4 / (sc.c * sc.epsilon_0)) / au_field_V_per_m()
    fwhm = au(IR["ir_fwhm_fs"], "fs")
    cep = IR["ir_cep_rad"]

    def A(t):
        return -(E0 / w) * math.exp(-2 * math.log(2) * t * t / fwhm**2) * math.sin(w * t + cep)

    t_end = 6 * fwhm  # the envelope is below 1e-21 there
    tau = au(tau_fs, "fs")
    W = au(W_eV, "eV")
    p = math.sqrt(2 * W)
    ip = au(IP_EV, "eV")

    def quad(f, lo, hi):
        return integrate.quad(f, lo, hi, limit=400, epsabs=1e-14, epsrel=1e-11)[0]

    # I1, I2 at tau once (long integrals), then from tau to t (short ones) inside the integrand.
    I1_tau = quad(A, tau, t_end)
    I2_tau = quad(lambda x: A(x) ** 2, tau, t_end)

    def integrand(t):
        I1 = I1_tau + quad(A, t, tau)
        I2 = I2_tau + quad(lambda x: A(x) ** 2, t, tau)
        return -1j * xuv(t - tau) * np.exp(1j * (-p * I1 - 0.5 * I2)) * np.exp(1j * (W + ip) * t)

    span = 12.0 / sig + 4 * au(XUV["gdd_as2"], "as2") * sig  # the chirped pulse's extent
    re = quad(lambda t: integrand(t).real, tau - span, tau + span)
    im = quad(lambda t: integrand(t).imag, tau - span, tau + span)
    return re + 1j * im


def test_sfa_amplitude_matches_scipy_quad():
    W = [34.0, 38.4, 42.0]
    tau = [-1.2, 0.35]
    amp = sw.reference.sfa_amplitude(delay_fs=tau, energy_eV=W, ionization_energy_eV=IP_EV,
                                     grid_step_as=8.0, grid_points=1024, **XUV, **IR)
    assert amp.shape == (len(tau), len(W))
    peak = np.abs(amp).max()
    assert peak > 0
    for i, t in enumerate(tau):
        for j, e in enumerate(W):
            ref = reference_amplitude(e, t)
            # Tolerance: the generator's Volkov tables are accurate to ~1e-9 A0/w
            # (synthetic/volkov_table.h); 1e-6 of the peak leaves room for the quadratures.
            assert abs(amp[i, j] - ref) < 1e-6 * peak, (t, e, amp[i, j], ref)


# ------------------------------------------------------------------------------------------
# FWHM against scipy.signal.peak_widths (linear interpolation of the half-maximum crossings)

@pytest.mark.parametrize("shape", ["gauss", "sech2", "skewed"])
def test_fwhm_matches_peak_widths(shape):
    x = np.linspace(-50.0, 70.0, 1201)
    dx = x[1] - x[0]
    if shape == "gauss":
        y = np.exp(-4 * np.log(2) * (x - 3.3) ** 2 / 17.0**2)
    elif shape == "sech2":
        y = 1.0 / np.cosh((x + 4.1) / 6.0) ** 2
    else:
        y = np.where(x < 5, np.exp(-((x - 5) / 4.0) ** 2), np.exp(-((x - 5) / 13.0) ** 2))
    k = int(np.argmax(y))
    # Half of the maximum above zero (FWHM), not of the prominence above the profile's bases:
    # prominence = the peak value, bases at the ends (scipy.signal.peak_widths documentation).
    prominence = (np.array([y[k]]), np.array([0]), np.array([len(y) - 1]))
    width_samples = signal.peak_widths(y, [k], rel_height=0.5, prominence_data=prominence)[0][0]
    assert sw.reference.fwhm(list(x), list(y)) == pytest.approx(width_samples * dx, rel=1e-9)
    if shape == "gauss":  # and the analytic value (sampling error of linear interpolation)
        assert sw.reference.fwhm(list(x), list(y)) == pytest.approx(17.0, rel=1e-3)


# ------------------------------------------------------------------------------------------
# Fourier sign convention against numpy.fft

def test_fft_sign_convention_matches_numpy():
    rng = np.random.default_rng(5)
    z = rng.normal(size=96) + 1j * rng.normal(size=96)
    out = sw.reference.fft_time_to_freq(list(z))
    # Time -> frequency with exp(+i w t): numpy's ifft without its 1/N (numpy.fft docs).
    np.testing.assert_allclose(out, len(z) * np.fft.ifft(z), rtol=0, atol=1e-10 * np.abs(out).max())
    # A field E ~ exp(-i W0 t) (DESIGN.md) has its spectrum at +W0, bin k0.
    n, k0 = 128, 9
    t = np.arange(n)
    spec = np.abs(sw.reference.fft_time_to_freq(list(np.exp(-2j * np.pi * k0 * t / n))))
    assert int(np.argmax(spec)) == k0


# ------------------------------------------------------------------------------------------
# Unit conversions against scipy.constants (CODATA 2018)

def test_units_match_codata():
    u = sw.units
    hartree_eV = sc.physical_constants["Hartree energy in eV"][0]
    t_au = sc.physical_constants["atomic unit of time"][0]
    assert u.au_to_eV(1.0) == pytest.approx(hartree_eV, rel=1e-12)
    assert u.eV_to_au(hartree_eV) == pytest.approx(1.0, rel=1e-12)
    assert u.au_to_fs(1.0) == pytest.approx(t_au * 1e15, rel=1e-12)
    assert u.au_to_as(1.0) == pytest.approx(t_au * 1e18, rel=1e-12)
    assert u.fs_to_au(1.0) == pytest.approx(1e-15 / t_au, rel=1e-12)
    assert u.as_to_au(1.0) == pytest.approx(1e-18 / t_au, rel=1e-12)
    # photon energy h c / lambda of an 800 nm photon
    w800 = sc.h * sc.c / 800e-9 / sc.e / hartree_eV
    assert u.wavelength_nm_to_omega_au(800.0) == pytest.approx(w800, rel=1e-10)
    # peak field of a cycle-averaged intensity, I = c eps0 E0^2 / 2
    E0 = math.sqrt(2 * 1e14 * 1e4 / (sc.c * sc.epsilon_0)) / au_field_V_per_m()
    assert u.intensity_to_peak_field_au(1e14) == pytest.approx(E0, rel=1e-8)
    # ponderomotive energy Up = e^2 E0^2 / (4 m w^2) (SI)
    E0_SI = math.sqrt(2 * 1e14 * 1e4 / (sc.c * sc.epsilon_0))
    omega_SI = 2 * math.pi * sc.c / 800e-9
    Up_eV = sc.e**2 * E0_SI**2 / (4 * sc.m_e * omega_SI**2) / sc.e
    assert u.au_to_eV(u.ponderomotive_energy_au(1e14, w800)) == pytest.approx(Up_eV, rel=1e-8)
