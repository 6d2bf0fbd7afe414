# Writes a synthetic spectrum holding Na I D and Ca II H&K absorption of the
# same clouds, as text ("wave flux error"), for the joint-fit command tests;
# independent of doubletty's own model.
#
#   awk -v step=0.05 -v snr=50 -v seed=1 -v comps="v:b:tauNa:tauCa;..." \
#       -f fit_joint_spectrum.awk
#
# Two stretches of pixels: 3900-4000 A (Ca II) and 5850-5940 A (Na I); the
# gap between them is not sampled.  Each component is a Doppler (Gaussian)
# optical depth profile of one velocity v and Doppler parameter b [km/s] in
# every line, central optical depth tauNa in Na I 5891 and tauCa in Ca II
# 3934, the weaker line of each doublet with the ratio of f lambda:
#   Na I  0.3201*5897.5581 / (0.6408*5891.5833) = 0.5000
#   Ca II 0.3116*3969.5901 / (0.6267*3934.7750) = 0.5016
# (vacuum wavelengths and f: Morton 2003, ApJS 149, 205).  N of a component
# is tau0 b / (1.497e-15 f lambda) [cm^-2, b in km/s, lambda in A]
# (Spitzer 1978, Physical Processes in the Interstellar Medium, eq. 3-50,
# from memory).  Flat continuum 1; Gaussian noise 1/snr (Box-Muller on
# awk's rand() seeded by `seed`).
function gauss(   u, v) {
  u = rand(); v = rand();
  if (u < 1e-300) u = 1e-300;
  return sqrt(-2 * log(u)) * cos(6.283185307179586 * v);
}
function depth(w,   tau, k, x) {
  tau = 0;
  for (k = 1; k <= nc; k++) {
    x = c * (w / 5891.5833 - 1) - cv[k]; tau += cna[k] * exp(-(x / cb[k]) ^ 2);
    x = c * (w / 5897.5581 - 1) - cv[k]; tau += 0.5000 * cna[k] * exp(-(x / cb[k]) ^ 2);
    x = c * (w / 3934.7750 - 1) - cv[k]; tau += cca[k] * exp(-(x / cb[k]) ^ 2);
    x = c * (w / 3969.5901 - 1) - cv[k]; tau += 0.5016 * cca[k] * exp(-(x / cb[k]) ^ 2);
  }
  return tau;
}
BEGIN {
  c = 299792.458;
  srand(seed);
  nc = (comps == "") ? 0 : split(comps, cl, ";");
  for (k = 1; k <= nc; k++) {
    split(cl[k], p, ":"); cv[k] = p[1]; cb[k] = p[2]; cna[k] = p[3]; cca[k] = p[4];
  }
  printf "# synthetic Na I D and Ca II H&K test spectrum (seed %d)\n", seed;
  for (s = 0; s < 2; s++) {
    lo = s ? 5850 : 3900; hi = s ? 5940 : 4000;
    n = int((hi - lo) / step + 0.5) + 1;
    for (i = 0; i < n; i++) {
      w = lo + i * step;
      sig = 1.0 / snr;
      printf "%.4f %.6f %.6f\n", w, exp(-depth(w)) + sig * gauss(), sig;
    }
  }
}
