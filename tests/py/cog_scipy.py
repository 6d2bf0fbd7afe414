#!/usr/bin/env python3
"""The curve of growth re-computed with SciPy: W = lambda0 (b/c) int (1 -
exp(-tau0 H(a, x))) dx over all x, H(a, x) = Re wofz(x + i a)
(scipy.special.wofz), tau0 = N sigma0 f / (sqrt(pi) b/lambda0), a = Gamma /
(4 pi b/lambda0), integrated with scipy.integrate.quad.  Reads the driver's
table "lambda0 f gamma logN b W" on standard input; exits 1 when any W
differs by more than 1e-6 relative.  With --invert LAMBDA0 F GAMMA "W B"
prints the log N whose line has rest W [A] at Doppler parameter B [km/s]."""
import sys
import numpy as np
from scipy.special import wofz
from scipy.integrate import quad, IntegrationWarning
import warnings

warnings.simplefilter("ignore", IntegrationWarning)  # far wings of thin lines: below 1e-12

SIGMA0 = 0.02654008856      # pi e^2/(m_e c) [cm^2 s^-1], CODATA 2018
C_KMS = 299792.458


def cog_w(lam, f, gam, logn, b):
    dnu = b * 1e5 / (lam * 1e-8)
    tau0 = 10.0 ** logn * SIGMA0 * f / (np.sqrt(np.pi) * dnu)
    a = gam / (4 * np.pi * dnu)
    g = lambda x: -np.expm1(-tau0 * wofz(x + 1j * a).real)
    x1 = 4.0 + (2.0 * np.sqrt(np.log(tau0)) if tau0 > 1 else 0.0)
    i1 = quad(g, 0, x1, epsabs=0, epsrel=1e-11, limit=400)[0]
    i2 = quad(g, x1, np.inf, epsabs=0, epsrel=1e-11, limit=400)[0]
    return lam * (b / C_KMS) * 2 * (i1 + i2)


if len(sys.argv) == 6 and sys.argv[1] == "--invert":
    # --invert LAMBDA0 F GAMMA "W b": log N of rest W [A] at b [km/s]
    from scipy.optimize import brentq
    lam, f, gam = map(float, sys.argv[2:5])
    w, b = map(float, sys.argv[5].split())
    print("%.6f" % brentq(lambda x: np.log(cog_w(lam, f, gam, x, b) / w), 5.0, 24.0,
                          xtol=1e-9))
    sys.exit(0)

worst = 0.0
n = 0
for line in sys.stdin:
    lam, f, gam, logn, b, w = map(float, line.split())
    ref = cog_w(lam, f, gam, logn, b)
    d = abs(w / ref - 1)
    n += 1
    if d > worst:
        worst = d
    if d > 1e-6:
        print(f"log N {logn} b {b}: W {w:.10g} vs SciPy {ref:.10g} (rel {d:.2g})")
print(f"{n} cases, worst relative difference {worst:.2g}")
sys.exit(0 if n > 0 and worst <= 1e-6 else 1)
