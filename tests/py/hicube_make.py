"""Analytic 21-cm cubes for tests/scripts/hi_cube.sh (astropy.io.fits).

Every cube holds the same Gaussian emission line, spatially uniform:
  T_B(v) = T0 exp(-(v - V0)^2 / (2 S^2)),  T0 = 20 K, V0 = 15 km/s, S = 8 km/s
(v the radio velocity of the channel, barycentric), on a 21 x 17 pixel
RA---TAN/DEC--TAN map of 30 arcsec pixels around (150, +20) deg, with a
blank (NaN) corner of 5 x 5 pixels at the low-RA-pixel, low-Dec-pixel end.
  vrad_K.fits   VRAD axis [m/s], K
  freq_K.fits   FREQ axis [Hz], K, the same channels
  vrad_Jy.fits  VRAD axis, Jy/beam with BMAJ = 60", BMIN = 45":
                S = T nu_GHz^2 bmaj bmin / 1.222e6 (Rayleigh-Jeans, common practice)
  example.fits  the worked example: a line of peak 10 mJy/beam, beam 60" x 60"
Expected: N(HI) = 1.823e18 T0 S sqrt(2 pi) cm^-2 (optically thin)."""
import sys
import numpy as np
from astropy.io import fits

out = sys.argv[1]
C = 299792458.0
NU0 = 1420405751.768
T0, V0, S = 20.0, 15.0, 8.0
nx, ny = 21, 17
dv = 1.0                      # km/s per channel
v = -60.0 + dv * np.arange(121)  # radio velocity of each channel [km/s]
line = T0 * np.exp(-0.5 * ((v - V0) / S) ** 2)


def header(kind, unit, bmaj=None, bmin=None):
    h = fits.Header()
    h["CTYPE1"] = "RA---TAN"; h["CRVAL1"] = 150.0; h["CDELT1"] = -30 / 3600; h["CRPIX1"] = 11.0; h["CUNIT1"] = "deg"
    h["CTYPE2"] = "DEC--TAN"; h["CRVAL2"] = 20.0; h["CDELT2"] = 30 / 3600; h["CRPIX2"] = 9.0; h["CUNIT2"] = "deg"
    if kind == "VRAD":
        h["CTYPE3"] = "VRAD"; h["CRVAL3"] = v[0] * 1e3; h["CDELT3"] = dv * 1e3; h["CRPIX3"] = 1.0; h["CUNIT3"] = "m/s"
    else:
        h["CTYPE3"] = "FREQ"; h["CRVAL3"] = NU0 * (1 - v[0] * 1e3 / C); h["CDELT3"] = -NU0 * dv * 1e3 / C
        h["CRPIX3"] = 1.0; h["CUNIT3"] = "Hz"
    h["RESTFRQ"] = NU0
    h["SPECSYS"] = "BARYCENT"
    h["RADESYS"] = "ICRS"
    h["BUNIT"] = unit
    if bmaj:
        h["BMAJ"] = bmaj / 3600; h["BMIN"] = bmin / 3600; h["BPA"] = 0.0
    return h


def cube(spec):
    d = np.repeat(np.repeat(spec[:, None, None], ny, axis=1), nx, axis=2).astype(np.float32)
    d[:, :5, :5] = np.nan
    return d


fits.PrimaryHDU(cube(line), header=header("VRAD", "K")).writeto(f"{out}/vrad_K.fits", overwrite=True)
fits.PrimaryHDU(cube(line), header=header("FREQ", "K")).writeto(f"{out}/freq_K.fits", overwrite=True)
nu_ghz = NU0 * (1 - v * 1e3 / C) / 1e9
jy = line * nu_ghz ** 2 * 60.0 * 45.0 / 1.222e6
fits.PrimaryHDU(cube(jy), header=header("VRAD", "Jy/beam", 60.0, 45.0)).writeto(f"{out}/vrad_Jy.fits", overwrite=True)
ex = 0.010 * np.exp(-0.5 * ((v - 0.0) / S) ** 2)
fits.PrimaryHDU(cube(ex), header=header("VRAD", "Jy/beam", 60.0, 60.0)).writeto(f"{out}/example.fits", overwrite=True)
# bad headers
h = header("VRAD", "K"); del h["BUNIT"]
fits.PrimaryHDU(cube(line), header=h).writeto(f"{out}/nobunit.fits", overwrite=True)
h = header("VRAD", "K"); h["CTYPE3"] = "STOKES"
fits.PrimaryHDU(cube(line), header=h).writeto(f"{out}/nospec.fits", overwrite=True)
h = header("VRAD", "Jy/beam")
fits.PrimaryHDU(cube(line), header=h).writeto(f"{out}/nobeam.fits", overwrite=True)
print(f"{1.823e18 * T0 * S * np.sqrt(2 * np.pi):.6e}")
