/* Confidence intervals for a binomial proportion (k successes in n trials).
 *
 * Three methods, as compared by Brown, Cai & DasGupta (2001, Statistical
 * Science 16, 101; "BCD" below):
 *   Wilson score   the interval of p where |k/n - p| <= z sqrt(p(1-p)/n)
 *                  (Wilson 1927, JASA 22, 209; BCD eq. 4);
 *   Clopper-Pearson ("exact") the Beta quantiles B(a/2; k, n-k+1) and
 *                  B(1-a/2; k+1, n-k) (Clopper & Pearson 1934, Biometrika
 *                  26, 404; BCD section 4.2.2);
 *   Jeffreys       the equal-tailed interval of the Beta(k+1/2, n-k+1/2)
 *                  posterior, with the lower end 0 when k = 0 and the
 *                  upper end 1 when k = n (BCD section 4.1.2).
 * z is the standard normal quantile 1 - a/2 with a = 1 - cl. */
#ifndef DOUBLETTY_BINOM_H
#define DOUBLETTY_BINOM_H

typedef enum dt_binom_method {
  DT_BINOM_WILSON = 0,
  DT_BINOM_EXACT,    /* Clopper-Pearson */
  DT_BINOM_JEFFREYS
} dt_binom_method;

/* "wilson", "exact", "jeffreys" */
const char *dt_binom_method_name(dt_binom_method m);
/* DT_OK, or DT_EINVAL for an unknown name. */
int dt_binom_method_parse(const char *s, dt_binom_method *m);

/* The interval [*lo, *hi] for k successes in n trials at confidence cl.
 *
 * Given:    k, n   0 <= k <= n, n >= 1
 *           cl     confidence level, 0 < cl < 1 (0.683 for "1 sigma")
 *           m      the method
 * Returned: *lo, *hi  the interval, 0 <= lo <= k/n <= hi <= 1
 * Status:   DT_OK, or DT_EINVAL (n < 1, k outside [0, n], cl outside
 *           (0, 1)); *lo and *hi are then NaN.
 * Notes:    Beta quantiles from GSL (gsl_cdf_beta_Pinv), normal quantile
 *           from gsl_cdf_ugaussian_Pinv.
 * References: Brown, Cai & DasGupta 2001, Statistical Science 16, 101. */
int dt_binom_interval(long k, long n, double cl, dt_binom_method m, double *lo, double *hi);

#endif
