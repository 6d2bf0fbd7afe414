# Writes a synthetic Na I D spectrum as text ("wave flux error") for the
# fit-command and shard tests, independent of doubletty's own model.
#
#   awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=30 -v seed=1 \
#       -v comps="v:tau0:b;..." [-v vsys=KMS] [-v nanlo=A -v nanhi=A] [-v cf=C] \
#       -f fit_cmd_spectrum.awk
#
# Each component is a pure Doppler (Gaussian) optical depth profile with
# central optical depth tau0 in Na I 5891 and half of it in Na I 5897 (the
# ratio f lambda of the two lines, 0.3201*5897.56 / (0.6408*5891.58) = 0.500,
# Morton 2003, ApJS 149, 205).  Such a component has
#   N = tau0 b / (1.497e-15 f lambda)   [cm^-2; b in km/s, lambda in A]
# (Spitzer 1978, Physical Processes in the Interstellar Medium, eq. 3-50,
# from memory).  The continuum slopes gently; Gaussian noise with sigma =
# continuum/snr comes from awk's rand() seeded by `seed` (Box-Muller).
# Pixels with nanlo <= wave <= nanhi get flux "nan" (masked by the reader).
# cf: the absorber covers this fraction of the source, I = 1 - cf + cf e^-tau
# (Hamann et al. 1997, ApJ 478, 80, eq. 1; default 1).
function gauss(   u, v) {
  u = rand(); v = rand();
  if (u < 1e-300) u = 1e-300;
  return sqrt(-2 * log(u)) * cos(6.283185307179586 * v);
}
BEGIN {
  c = 299792.458; l1 = 5891.5833; l2 = 5897.5581;
  if (vsys == "") vsys = 0;
  if (cf == "") cf = 1;
  srand(seed);
  nc = (comps == "") ? 0 : split(comps, cl, ";");
  for (k = 1; k <= nc; k++) { split(cl[k], p, ":"); cv[k] = p[1]; ct[k] = p[2]; cb[k] = p[3]; }
  n = int((hi - lo) / step + 0.5) + 1;
  printf "# synthetic Na I D test spectrum (seed %d)\n", seed;
  for (i = 0; i < n; i++) {
    w = lo + i * step;
    cont = 1.0e-16 * (1 + 0.001 * (w - lo));
    tau = 0;
    for (k = 1; k <= nc; k++) {
      v1 = c * (w / (l1 * (1 + vsys / c)) - 1) - cv[k];
      v2 = c * (w / (l2 * (1 + vsys / c)) - 1) - cv[k];
      tau += ct[k] * (exp(-(v1 / cb[k]) ^ 2) + 0.5 * exp(-(v2 / cb[k]) ^ 2));
    }
    sig = cont / snr;
    f = cont * (1 - cf + cf * exp(-tau)) + sig * gauss();
    if (nanlo != "" && w >= nanlo && w <= nanhi) printf "%.4f nan %.6e\n", w, sig;
    else printf "%.4f %.6e %.6e\n", w, f, sig;
  }
}
