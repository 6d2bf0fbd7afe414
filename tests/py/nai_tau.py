"""The optical depth of Na I D components, for the spectra the tests
synthesise independently of doubletty's model: Voigt profiles from the
Faddeeva function (scipy.special.wofz), tau = N sigma0 f Re w(x + i a) /
(sqrt(pi) Delta nu_D), x the frequency offset in Doppler widths, a =
Gamma / (4 pi Delta nu_D); atomic data of Morton (2003, ApJS 149, 205)."""
import numpy as np
from scipy.special import wofz

C_KMS = 299792.458                 # [km/s], exact (SI)
C_CGS = 2.99792458e10
SIGMA0 = 0.02654008850             # pi e^2/(m_e c) [cm^2/s] (from memory, CODATA)
# Na I D2, D1: vacuum wavelength [A], f, Gamma [1/s] (Morton 2003, ApJS 149, 205)
NAI = [(5891.5833, 0.6408, 6.16e7), (5897.5581, 0.3201, 6.14e7)]


def tau(lam, comps):
    """Optical depth at vacuum wavelengths lam [A] of components (log N
    [cm^-2], b [km/s], v [km/s]) summed."""
    t = np.zeros_like(lam)
    for logn, b, v in comps:
        for lam0, f, gam in NAI:
            dnu_d = b * 1e5 / (lam0 * 1e-8)
            lam_rest = lam / (1 + v / C_KMS)
            x = (C_CGS / (lam_rest * 1e-8) - C_CGS / (lam0 * 1e-8)) / dnu_d
            a = gam / (4 * np.pi * dnu_d)
            t += 10 ** logn * SIGMA0 * f * wofz(x + 1j * a).real / (np.sqrt(np.pi) * dnu_d)
    return t
