"""Reference values from astropy for the velocity frames and positions.

Writes N small FITS spectra into DIR and, per spectrum, a line of the
expected values into DIR/expect.txt:
  name ra_icrs dec_icrs v_bary v_helio v_lsrk v_lsrd
ra/dec in degrees (ICRS), velocities in km/s:
  v_bary   SkyCoord.radial_velocity_correction('barycentric') (Wright &
           Eastman 2014 eq. 28 as astropy codes it) for the TOPOCENT files;
  v_helio  the same, 'heliocentric';
  v_lsrk   radial velocity in astropy's LSRK frame of a source at rest in
           the barycentric frame (20 km/s toward 18h +30 B1900);
  v_lsrd   the same in astropy's LSR frame with its default solar motion
           (U, V, W) = (11.1, 12.24, 7.25) km/s (Schoenrich et al. 2010).
Positions are written in several forms: degrees, sexagesimal text, and
FK4 B1950 (RADESYS FK4, EQUINOX 1950), converted here by astropy
(FK4 B1950, obstime B1950, -> ICRS)."""
import sys, warnings
import numpy as np
from astropy.io import fits
from astropy.time import Time
from astropy.coordinates import SkyCoord, EarthLocation, LSRK, LSR, ICRS, FK4
from astropy.utils import iers
import astropy.units as u

warnings.simplefilter("ignore")
iers.conf.auto_download = False
iers.conf.auto_max_age = None

out = sys.argv[1]
n = int(sys.argv[2]) if len(sys.argv) > 2 else 24
rng = np.random.default_rng(20261202)
mjd0 = rng.uniform(51600, 59500, n)            # 2000 .. 2021 (bundled IERS-B)
exptime = rng.uniform(0, 3600, n)
lon = rng.uniform(-180, 180, n)
lat = rng.uniform(-70, 70, n)
height = rng.uniform(0, 4500, n)
ra_in = rng.uniform(0, 360, n)
dec_in = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
form = np.arange(n) % 4        # 0 degrees, 1 sexagesimal, 2 FK4 B1950, 3 OBSGEO-L/B/H + degrees

loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, height * u.m)
mid = Time(mjd0 + exptime / 2 / 86400.0, format="mjd", scale="utc")
icrs = []
for i in range(n):
    if form[i] == 2:
        c = SkyCoord(ra_in[i] * u.deg, dec_in[i] * u.deg, frame=FK4(equinox="B1950", obstime="B1950"))
        c = c.transform_to(ICRS())
    else:
        c = SkyCoord(ra_in[i] * u.deg, dec_in[i] * u.deg, frame="icrs")
    icrs.append((c.ra.deg, c.dec.deg))
icrs = np.array(icrs)
sc = SkyCoord(icrs[:, 0] * u.deg, icrs[:, 1] * u.deg, frame="icrs")
vb = sc.radial_velocity_correction("barycentric", obstime=mid, location=loc).to(u.km / u.s).value
vh = sc.radial_velocity_correction("heliocentric", obstime=mid, location=loc).to(u.km / u.s).value
z = np.zeros(n)
rest = SkyCoord(ra=icrs[:, 0] * u.deg, dec=icrs[:, 1] * u.deg, distance=np.full(n, 1e6) * u.pc,
                pm_ra_cosdec=z * u.mas / u.yr, pm_dec=z * u.mas / u.yr,
                radial_velocity=z * u.km / u.s, frame="icrs")
vk = rest.transform_to(LSRK()).radial_velocity.to(u.km / u.s).value
vd = rest.transform_to(LSR()).radial_velocity.to(u.km / u.s).value

wave = np.linspace(5850.0, 5930.0, 200)
flux = np.ones_like(wave)
with open(f"{out}/expect.txt", "w") as ex:
    for i in range(n):
        for frame in ("TOPOCENT", "BARYCENT"):
            h = fits.Header()
            h["CTYPE1"] = "WAVE"
            h["CUNIT1"] = "Angstrom"
            h["CRVAL1"] = wave[0]
            h["CDELT1"] = wave[1] - wave[0]
            h["CRPIX1"] = 1.0
            h["SPECSYS"] = frame
            t = Time(mjd0[i], format="mjd", scale="utc")
            if i % 2:
                h["DATE-OBS"] = t.isot
            else:
                h["MJD-OBS"] = mjd0[i]
            h["EXPTIME"] = exptime[i]
            if form[i] == 1:
                cc = SkyCoord(ra_in[i] * u.deg, dec_in[i] * u.deg)
                h["RA"] = cc.ra.to_string(unit=u.hour, sep=":", precision=4, pad=True)
                h["DEC"] = cc.dec.to_string(unit=u.deg, sep=":", precision=3, alwayssign=True, pad=True)
            else:
                h["RA"] = ra_in[i]
                h["DEC"] = dec_in[i]
            if form[i] == 2:
                h["RADESYS"] = "FK4"
                h["EQUINOX"] = 1950.0
            if form[i] == 3:
                h["OBSGEO-L"] = lon[i]
                h["OBSGEO-B"] = lat[i]
                h["OBSGEO-H"] = height[i]
            else:
                g = loc[i].geocentric
                h["OBSGEO-X"] = g[0].to(u.m).value
                h["OBSGEO-Y"] = g[1].to(u.m).value
                h["OBSGEO-Z"] = g[2].to(u.m).value
            fits.PrimaryHDU(flux, header=h).writeto(f"{out}/{frame[0]}{i:03d}.fits", overwrite=True)
        # the sexagesimal text as written (rounded), read back by astropy
        if form[i] == 1:
            hh = fits.getheader(f"{out}/T{i:03d}.fits")
            c = SkyCoord(hh["RA"], hh["DEC"], unit=(u.hourangle, u.deg))
            icrs[i] = (c.ra.deg, c.dec.deg)
        ex.write(f"{i:03d} {icrs[i,0]:.10f} {icrs[i,1]:.10f} {vb[i]:.7f} {vh[i]:.7f} {vk[i]:.7f} {vd[i]:.7f}\n")
