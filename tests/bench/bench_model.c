/* Timing of the doublet model: one evaluation of flux + Jacobian for the
 * benchmark configuration (Na I, 660 pixels of 0.1 A from 5862 A, R = 20000,
 * oversampling 5, two components drawn in 11.3 < logN < 12.8, 3 < b < 15,
 * one near 0 and one near -220 km/s), for several tau cuts, and how the
 * time grows with pixels and components; then lines narrower than the
 * sub-pixel cells (sub-sampled), on those pixels and on survey pixels of
 * 0.5 A at R 3000 and 1 A at R 2000; then pixels much finer than the LSF
 * (0.028 km/s at R 40000, up to the 47 000 pixels of an 80 A window): the
 * allocation, the size of the pixel operator and the evaluation.  Prints
 * medians in microseconds.  First, the Voigt function itself: libcerf's
 * w(z) against dt_voigt_HL (the Taylor series near the real axis) over the
 * cores and near wings (|x| <= 8) at the damping of the doublets.
 *
 *   cc -std=c11 -O2 -Iinclude -D_POSIX_C_SOURCE=200809L tests/bench/bench_model.c \
 *      build/libdoubletty.a $(pkg-config --libs gsl cfitsio libcerf libcrypto) -lm
 */
#include "doubletty/atomic.h"
#include "doubletty/model.h"

#include <cerf.h>
#include <complex.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static double now_us(void) {
  struct timespec t;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t); /* CPU time: robust to a busy machine */
  return t.tv_sec * 1e6 + t.tv_nsec * 1e-3;
}

static int cmpd(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* A small deterministic generator so the bench needs nothing else. */
static double urand(unsigned long long *s) {
  *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
  return (double)(*s >> 11) / 9007199254740992.0;
}

static double bench(const dt_doublet *d, size_t npix, size_t ncomp, double tau_cut, int with_jac,
                    int *nrep_out) {
  double *wave = malloc(npix * sizeof *wave);
  double *flux = malloc(npix * sizeof *flux);
  double *jac = malloc(npix * 3 * DT_MAX_COMP * sizeof *jac);
  double start = 5895.0 - 0.05 * npix;
  for (size_t i = 0; i < npix; i++) wave[i] = start + 0.1 * i;
  dt_model_config cfg = {.doublet = d, .resolution = 20000.0, .oversample = 5, .tau_cut = tau_cut};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, npix, &cfg, DT_MAX_COMP, &e);
  if (!m) {
    fprintf(stderr, "bench: %s\n", e.what);
    exit(1);
  }
  enum { NSET = 64, NREP = 40 };
  static double t[NSET * NREP];
  unsigned long long seed = 20261202;
  int nt = 0;
  for (int s = 0; s < NSET; s++) {
    dt_component c[DT_MAX_COMP];
    for (size_t k = 0; k < ncomp; k++) {
      c[k].logN = 11.3 + 1.5 * urand(&seed);
      c[k].b = 3.0 + 12.0 * urand(&seed);
      c[k].v = -220.0 * (k % 2) - 60.0 * (double)(k / 2) + 60.0 * (urand(&seed) - 0.5);
    }
    for (int r = 0; r < NREP; r++) {
      c[0].v += 1e-3; /* new parameters each time */
      double t0 = now_us();
      dt_model_eval(m, c, ncomp, flux, with_jac == 1 ? jac : NULL, 3 * DT_MAX_COMP);
      if (with_jac == 2) dt_model_eval(m, c, ncomp, flux, jac, 3 * DT_MAX_COMP);
      t[nt++] = now_us() - t0;
    }
  }
  qsort(t, (size_t)nt, sizeof t[0], cmpd);
  dt_model_free(m);
  free(wave);
  free(flux);
  free(jac);
  *nrep_out = nt;
  return t[nt / 2];
}

/* One narrow component (logN, b) near 0 km/s plus a broad one near -220
 * km/s, on pixels of dlam A over 66 A at resolving power R. */
static void bench_narrow(const dt_doublet *d, double dlam, double R, double logN, double b) {
  size_t npix = (size_t)(66.0 / dlam);
  double *wave = malloc(npix * sizeof *wave), *flux = malloc(npix * sizeof *flux);
  double *jac = malloc(npix * 6 * sizeof *jac);
  for (size_t i = 0; i < npix; i++) wave[i] = 5862.0 + dlam * i;
  dt_model_config cfg = {.doublet = d, .resolution = R};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, npix, &cfg, 2, &e);
  if (!m) {
    fprintf(stderr, "bench: %s\n", e.what);
    exit(1);
  }
  enum { NSET = 16, NREP = 40 };
  static double t[3][NSET * NREP];
  unsigned long long seed = 7;
  int nt = 0;
  for (int s = 0; s < NSET; s++) {
    dt_component c[2] = {{logN, b, 10.0 * (urand(&seed) - 0.5)}, {12.0, 8.0, -220.0}};
    for (int r = 0; r < NREP; r++, nt++)
      for (int mode = 0; mode < 3; mode++) {
        c[0].v += 1e-3;
        double t0 = now_us();
        dt_model_eval(m, c, 2, flux, mode == 1 ? jac : NULL, 6);
        if (mode == 2) dt_model_eval(m, c, 2, flux, jac, 6);
        t[mode][nt] = now_us() - t0;
      }
  }
  for (int mode = 0; mode < 3; mode++) qsort(t[mode], (size_t)nt, sizeof t[mode][0], cmpd);
  dt_model_info in;
  dt_model_get_info(m, &in);
  printf("%5.1f %6.0f %6.1f %5.1f %5.1f %12.1f %14.1f %10.1f\n", dlam, R, in.step_kms, logN, b,
         t[0][nt / 2], t[1][nt / 2], t[2][nt / 2]);
  dt_model_free(m);
  free(wave);
  free(flux);
  free(jac);
}

/* npix pixels of dv km/s around 5894 A at resolving power R: time to
 * allocate, matrix size, and flux / flux+Jacobian for two components. */
static void bench_fine(const dt_doublet *d, size_t npix, double dv, double R) {
  double *wave = malloc(npix * sizeof *wave), *flux = malloc(npix * sizeof *flux);
  double *jac = malloc(npix * 6 * sizeof *jac);
  double dl = 5894.0 * dv / DT_C_KMS;
  for (size_t i = 0; i < npix; i++) wave[i] = 5894.0 + dl * ((double)i - 0.5 * (double)npix);
  dt_model_config cfg = {.doublet = d, .resolution = R};
  dt_err e;
  double ta = now_us();
  dt_model *m = dt_model_alloc(wave, npix, &cfg, 2, &e);
  ta = now_us() - ta;
  if (!m) {
    fprintf(stderr, "bench: %s\n", e.what);
    exit(1);
  }
  enum { NREP = 21 };
  double t[2][NREP];
  dt_component c[2] = {{12.5, 3.0, -5.0}, {12.0, 6.0, 20.0}};
  for (int r = 0; r < NREP; r++)
    for (int mode = 0; mode < 2; mode++) {
      c[0].v += 1e-3;
      double t0 = now_us();
      dt_model_eval(m, c, 2, flux, mode ? jac : NULL, 6);
      t[mode][r] = now_us() - t0;
    }
  qsort(t[0], NREP, sizeof t[0][0], cmpd);
  qsort(t[1], NREP, sizeof t[1][0], cmpd);
  dt_model_info in;
  dt_model_get_info(m, &in);
  printf("%7zu %6.3f %6.0f %6.3f %7.1f %9.1f %10.0f %12.0f %14.0f\n", npix, dv, R, in.step_kms,
         (double)in.ncoef / (double)npix, (double)in.ncoef * 8e-6, ta, t[0][NREP / 2],
         t[1][NREP / 2]);
  dt_model_free(m);
  free(wave);
  free(flux);
  free(jac);
}

/* Nanoseconds per value of w(x + ia), |x| <= 8, by libcerf (lib = 1) or by
 * dt_voigt_HL; the sum keeps the loop from being optimised away. */
static double bench_w(double a, int lib, double *sum) {
  const int n = 400000;
  double t0 = now_us(), s = 0;
  for (int i = 0; i < n; i++) {
    double x = -8.0 + 16.0 * i / n, H, L;
    if (lib) {
      double complex z;
      ((double *)&z)[0] = x;
      ((double *)&z)[1] = a;
      double complex w = w_of_z(z);
      H = creal(w);
      L = cimag(w);
    } else {
      dt_voigt_HL(a, x, &H, &L);
    }
    s += H + L;
  }
  *sum += s;
  return (now_us() - t0) * 1e3 / n;
}

int main(int argc, char **argv) {
  const char *table = argc > 1 ? argv[1] : "share/doubletty/atomic.dat";
  dt_atomic *at;
  dt_err e;
  if (dt_atomic_load(table, &at, &e) != DT_OK) {
    fprintf(stderr, "bench: %s: %s %s\n", table, e.where, e.what);
    return 1;
  }
  const dt_doublet *d = dt_atomic_find(at, "NaI");
  int nrep;
  printf("w(x + ia), |x| <= 8 [ns per value]: libcerf w_of_z, dt_voigt_HL\n");
  double sum = 0;
  const double as[] = {1e-4, 1e-3, 1e-2, 0.1};
  for (size_t i = 0; i < sizeof as / sizeof as[0]; i++) {
    double tl = bench_w(as[i], 1, &sum), ts = bench_w(as[i], 0, &sum);
    printf("  a = %-6g %8.1f %8.1f\n", as[i], tl, ts);
  }
  if (sum == 0) printf("\n");
  printf("doublet model, Na I, R = 20000, 0.1 A pixels, oversample 5 (median of evaluations)\n");
  printf("flux: model only; flux+jac: model and Jacobian at new parameters; step: model at new\n"
         "parameters then the Jacobian at the same ones (one solver iteration)\n");
  printf("%-8s %6s %5s %12s %14s %10s\n", "tau_cut", "pixels", "comp", "flux [us]", "flux+jac [us]",
         "step [us]");
  const double cuts[] = {1e-7, 1e-6, 1e-5, 1e-4};
  for (size_t c = 0; c < sizeof cuts / sizeof cuts[0]; c++) {
    double a = bench(d, 660, 2, cuts[c], 0, &nrep);
    double b = bench(d, 660, 2, cuts[c], 1, &nrep);
    double st = bench(d, 660, 2, cuts[c], 2, &nrep);
    printf("%-8.0e %6d %5d %12.1f %14.1f %10.1f\n", cuts[c], 660, 2, a, b, st);
  }
  printf("growth with pixels and components (default tau cut %g):\n", DT_MODEL_TAU_CUT);
  const size_t pix[] = {200, 660, 2000, 6000};
  const size_t nc[] = {1, 2, 4, 8};
  for (size_t p = 0; p < 4; p++)
    for (size_t k = 0; k < 4; k++) {
      double a = bench(d, pix[p], nc[k], 0.0, 0, &nrep);
      double b = bench(d, pix[p], nc[k], 0.0, 1, &nrep);
      double st = bench(d, pix[p], nc[k], 0.0, 2, &nrep);
      printf("%-8s %6zu %5zu %12.1f %14.1f %10.1f\n", "default", pix[p], nc[k], a, b, st);
    }
  printf("lines narrower than the cells (one such component and one of b = 8 km/s, default tau cut):\n");
  printf("%5s %6s %6s %5s %5s %12s %14s %10s\n", "A/pix", "R", "cell", "logN", "b", "flux [us]",
         "flux+jac [us]", "step [us]");
  const double setups[3][2] = {{0.1, 20000}, {0.5, 3000}, {1.0, 2000}};
  const double bs[] = {0.3, 1.0, 2.5}, lns[] = {12.0, 14.0};
  for (int s = 0; s < 3; s++)
    for (int ib = 0; ib < 3; ib++)
      for (int il = 0; il < 2; il++) bench_narrow(d, setups[s][0], setups[s][1], lns[il], bs[ib]);
  printf("pixels much finer than the LSF (two components, default tau cut):\n");
  printf("%7s %6s %6s %6s %7s %9s %10s %12s %14s\n", "pixels", "km/s", "R", "cell", "coef/px",
         "coef [MB]", "alloc [us]", "flux [us]", "flux+jac [us]");
  bench_fine(d, 4700, 0.028, 40000);
  bench_fine(d, 47000, 0.028, 40000);
  dt_atomic_free(at);
  return 0;
}
