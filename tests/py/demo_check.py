#!/usr/bin/env python3
"""Outside checks of the demo survey written by `doubletty demo DIR`.

Usage: demo_check.py DIR

Reads DIR/truth.csv and every spectrum it names with astropy and numpy only
(nothing from doubletty), and checks:

 1. every FITS file opens with astropy.io.fits and passes its standard
    verification (FITS Standard 4.0 rules as implemented by astropy);
 2. the wavelengths of the image files, computed by astropy.wcs (WCSLIB) from
    the header keywords -- linear WAVE, log-linear WAVE-LOG (FITS WCS Paper
    III, Greisen et al. 2006, A&A 446, 747, eq. 5) and air AWAV converted to
    vacuum with the IAU formula (Morton 2000, ApJS 130, 403, eq. 8) -- and of
    the tables and text files, match the coverage and pixel count in
    truth.csv;
 3. the injected Na I components explain the data: an independent forward
    model (Voigt profile from scipy.special.wofz, Gaussian line-spread
    function of FWHM c/R, pixel averaging) times a cubic continuum fitted by
    weighted least squares leaves a chi^2 around Na I D that is plausible
    for the stated uncertainties (p > 1e-4), and where the truth has strong absorption the model without it
    is rejected.  The truth's velocities are heliocentric: the wavelengths of
    a topocentric file (SPECSYS = 'TOPOCENT', with RA/DEC, MJD-OBS + EXPTIME/2
    and OBSGEO-L/B/H) are moved to the heliocentric frame by astropy's
    SkyCoord.radial_velocity_correction('heliocentric') first; barycentric
    files differ from heliocentric by less than 0.015 km/s and are taken
    as they are.

Prints one "ok"/"FAIL" line per check and a closing "N passed, N failed".
"""
import csv
import sys

import numpy as np
from astropy import units as u
from astropy.io import fits
from astropy.wcs import WCS
from scipy import constants as sc
from scipy.special import wofz
from scipy.stats import chi2 as chi2_dist

C_KMS = sc.c / 1e3
# Na I D2, D1: vacuum wavelength [A], oscillator strength, damping constant
# [s^-1] (Morton 2003, ApJS 149, 205).
NAI = [(5891.5833, 0.6408, 6.16e7), (5897.5581, 0.3201, 6.14e7)]
# pi e^2 / (m_e c) in cm^2 s^-1 from CODATA constants (SI e^2/(4 eps0 m_e c),
# times 1e4 cm^2/m^2).
SIGMA0 = sc.e ** 2 / (4 * sc.epsilon_0 * sc.m_e * sc.c) * 1e4

passed = failed = 0


def report(ok, what):
    global passed, failed
    if ok:
        passed += 1
        print("ok   - " + what)
    else:
        failed += 1
        print("FAIL - " + what)


def air_to_vac(lam_air):
    """IAU standard air -> vacuum (Morton 2000, ApJS 130, 403, eq. 8, with
    n evaluated at the vacuum wavenumber, solved by fixed-point iteration)."""
    vac = np.array(lam_air, dtype=float)
    for _ in range(10):
        s2 = (1e4 / vac) ** 2
        n = 1 + 1e-8 * (8342.13 + 2406030 / (130 - s2) + 15997 / (38.9 - s2))
        vac = lam_air * n
    return vac


def image_wave(hdr):
    """Pixel-centre wavelengths in Angstrom from the header via astropy.wcs."""
    w = WCS(hdr)
    n = hdr["NAXIS1"]
    vals = w.wcs_pix2world(np.arange(n, dtype=float), 0)[0]
    unit = u.Unit(w.wcs.cunit[0])
    lam = (vals * unit).to_value(u.AA)
    if hdr["CTYPE1"].strip().upper().startswith("AWAV"):
        lam = air_to_vac(lam)
    return lam


def load(d, row):
    """(wave_vac, flux, sigma, good) of one truth row, read with astropy/numpy."""
    path = d + "/" + row["file"]
    if path.endswith(".txt"):
        a = np.loadtxt(path)
        return a[:, 0], a[:, 1], a[:, 2], np.isfinite(a[:, 1]) & (a[:, 2] > 0)
    with fits.open(path) as h:
        if h[0].data is not None:
            flux = h[0].data.astype(float)
            aux = h[1].data.astype(float)
            if h[1].name == "IVAR":
                good = np.isfinite(flux) & (aux > 0)
                sig = np.where(good, 1 / np.sqrt(np.where(aux > 0, aux, 1)), np.inf)
            else:
                good = np.isfinite(flux) & (aux > 0)
                sig = np.where(good, aux, np.inf)
            return image_wave(h[0].header), flux, sig, good
        t = h[1].data
        r = int(row["row"])
        if r > 0:
            t = t[r - 1 : r]
            wave, flux, ivar, mask = (t[c][0] for c in ("WAVE", "FLUX", "IVAR", "MASK"))
        else:
            wave, flux, ivar, mask = (t[c] for c in ("WAVE", "FLUX", "IVAR", "MASK"))
        ivar = ivar.astype(float)
        good = np.isfinite(flux) & (ivar > 0) & (mask == 0)
        sig = np.where(good, 1 / np.sqrt(np.where(ivar > 0, ivar, 1)), np.inf)
        return wave.astype(float), flux.astype(float), sig, good


def to_helio(d, row, wave):
    """Heliocentric wavelengths of a topocentric FITS image (astropy)."""
    path = d + "/" + row["file"]
    if not path.endswith(".fits") or int(row["row"]) > 0:
        return wave
    with fits.open(path) as h:
        hdr = h[0].header
        if h[0].data is None or hdr.get("SPECSYS", "").strip() != "TOPOCENT":
            return wave
    from astropy.coordinates import EarthLocation, SkyCoord
    from astropy.time import Time
    from astropy.utils import iers
    iers.conf.auto_download = False
    ra, dec = hdr["RA"], hdr["DEC"]
    c = (SkyCoord(ra, dec, unit=(u.hourangle, u.deg)) if isinstance(ra, str)
         else SkyCoord(ra * u.deg, dec * u.deg))
    t = Time(hdr["MJD-OBS"] + hdr["EXPTIME"] / 2 / 86400.0, format="mjd", scale="utc")
    loc = EarthLocation.from_geodetic(hdr["OBSGEO-L"] * u.deg, hdr["OBSGEO-B"] * u.deg,
                                      hdr["OBSGEO-H"] * u.m)
    import warnings
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        v = c.radial_velocity_correction("heliocentric", obstime=t, location=loc).to_value(u.km / u.s)
    return wave * (1 + v / C_KMS)


def model_flux(wave, comps, R):
    """Normalised Na I flux on the pixel centres wave (vacuum A): Voigt optical
    depth tau = N sigma0 f H(a,x) / (sqrt(pi) dnu_D) (e.g. Draine 2011,
    Physics of the ISM and IGM, ch. 6), on a fine grid uniform in ln(lambda),
    convolved with a Gaussian of FWHM c/R and averaged over each pixel."""
    dv = 0.25  # km/s per fine step
    lo, hi = np.log(wave[0]) - 0.004, np.log(wave[-1]) + 0.004
    nfine = int((hi - lo) / (dv / C_KMS)) + 1
    lnl = lo + np.arange(nfine) * (dv / C_KMS)
    lam = np.exp(lnl)
    tau = np.zeros(nfine)
    for logN, b, v in comps:
        for lam0, f, gam in NAI:
            lam_rest = lam / (1 + v / C_KMS)
            nu = sc.c / (lam_rest * 1e-10)
            nu0 = sc.c / (lam0 * 1e-10)
            dnu = (b * 1e3) / (lam0 * 1e-10)
            x = (nu - nu0) / dnu
            a = gam / (4 * np.pi * dnu)
            H = wofz(x + 1j * a).real
            tau += 10 ** logN * SIGMA0 * f * H / (np.sqrt(np.pi) * dnu)
    fl = np.exp(-tau)
    sig_v = C_KMS / R / (2 * np.sqrt(2 * np.log(2)))
    k = np.arange(-int(5 * sig_v / dv), int(5 * sig_v / dv) + 1) * dv
    ker = np.exp(-0.5 * (k / sig_v) ** 2)
    ker /= ker.sum()
    pad = len(k) // 2
    conv = np.convolve(np.pad(fl, pad, mode="edge"), ker, mode="valid")
    edges = np.concatenate(
        ([wave[0] - 0.5 * (wave[1] - wave[0])], 0.5 * (wave[1:] + wave[:-1]),
         [wave[-1] + 0.5 * (wave[-1] - wave[-2])]))
    cum = np.concatenate(([0.0], np.cumsum(conv)))
    idx = np.searchsorted(lam, edges)
    return (cum[idx[1:]] - cum[idx[:-1]]) / np.maximum(idx[1:] - idx[:-1], 1)


def chi2_cubic(x, y, s, m):
    """Minimum chi^2 of y ~ m * (cubic in x), weights 1/s^2."""
    A = np.vstack([m * x ** k for k in range(4)]).T / s[:, None]
    coef, *_ = np.linalg.lstsq(A, y / s, rcond=None)
    r = y / s - A @ coef
    return float(r @ r)


def main():
    d = sys.argv[1]
    with open(d + "/truth.csv") as f:
        rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    sights = {}
    for r in rows:
        sights.setdefault((r["file"], r["row"]), []).append(r)

    files = sorted({r["file"] for r in rows if r["file"].endswith(".fits")})
    for fn in files:
        try:
            with fits.open(d + "/" + fn) as h:
                h.verify("exception")
            report(True, f"{fn}: opens and verifies with astropy.io.fits")
        except Exception as ex:  # noqa: BLE001 - any failure is the finding
            report(False, f"{fn}: astropy.io.fits: {ex}")

    layouts_seen = set()
    for (fn, rno), rs in sights.items():
        r0 = rs[0]
        tag = fn + (f" row {rno}" if rno != "0" else "")
        layouts_seen.add(r0["layout"])
        wave, flux, sig, good = load(d, r0)
        n = int(r0["npix"])
        wmin, wmax = float(r0["wave_min"]), float(r0["wave_max"])
        ok = len(wave) == n and abs(wave[0] - wmin) < 2e-6 and abs(wave[-1] - wmax) < 2e-6
        report(ok, f"{tag} ({r0['layout']}): {len(wave)} pixels {wave[0]:.6f}-{wave[-1]:.6f} A,"
                   f" truth {n} pixels {wmin:.6f}-{wmax:.6f} A")

        if "sky" in r0["defects"]:
            continue  # sky residuals are not part of the absorption model
        wave = to_helio(d, r0, wave)
        comps = [(float(c["logN"]), float(c["b"]), float(c["v_helio"]))
                 for c in rs if c["doublet"] == "NaI" and c["origin"] != "none"]
        sel = (wave > 5868) & (wave < 5928) & good
        x = (wave[sel] - 5898.0) / 30.0
        # model on a contiguous stretch around the window (masked pixels too,
        # so that pixel edges stay right), then the usable pixels
        span = np.nonzero((wave > 5860) & (wave < 5936))[0]
        lo, hi = span[0], span[-1] + 1
        m_true = (model_flux(wave[lo:hi], comps, float(r0["R"]))[sel[lo:hi]]
                  if comps else np.ones(sel.sum()))
        dof = sel.sum() - 4
        c_true = chi2_cubic(x, flux[sel], sig[sel], m_true)
        c_null = chi2_cubic(x, flux[sel], sig[sel], np.ones(sel.sum()))
        # a correct model leaves chi^2 distributed as chi^2 with dof degrees of
        # freedom (Gaussian noise of the stated sigma): reject below p = 1e-4
        p = chi2_dist.sf(c_true, dof)
        report(p > 1e-4,
               f"{tag}: injected Na I model fits, chi2/dof = {c_true / dof:.2f}"
               f" ({dof} dof, p = {p:.2g})")
        depth = 1 - m_true.min() if comps else 0.0
        if depth * float(r0["snr"]) > 8:
            report(c_null - c_true > 25,
                   f"{tag}: absorption (depth {depth:.2f}) is there: chi2 without it"
                   f" larger by {c_null - c_true:.0f}")
    want = {"image-linear", "image-log", "image-air", "table-columns", "table-rows", "text"}
    report(want <= layouts_seen, "layouts present: " + ", ".join(sorted(layouts_seen)))
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
