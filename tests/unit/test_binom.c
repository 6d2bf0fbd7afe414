/* Binomial proportion intervals (binom.h) against SciPy and the closed
 * forms of the published definitions. */
#include <math.h>

#include "doubletty/binom.h"
#include "doubletty/status.h"
#include "harness.h"

/* k, n, cl, Wilson lo/hi, Clopper-Pearson lo/hi, Jeffreys lo/hi.
 * Source: SciPy 1.10 (Debian python3-scipy):
 *   scipy.stats.binomtest(k, n).proportion_ci(cl, 'wilson') and (cl, 'exact');
 *   Jeffreys: scipy.stats.beta.ppf((1-cl)/2, k+.5, n-k+.5) and
 *   beta.ppf((1+cl)/2, ...), with 0 for k = 0 and 1 for k = n as in
 *   Brown, Cai & DasGupta 2001, Statistical Science 16, 101, section 4.1.2. */
static const double ref[][9] = {
    {3, 10, 0.683, 0.178759350075, 0.457646729911, 0.141609285811, 0.508362076487, 0.179861906722, 0.457850918635},
    {3, 10, 0.950, 0.107791267406, 0.603221852539, 0.0667395111777, 0.65245285006, 0.0926945939382, 0.605818318149},
    {1, 20, 0.683, 0.0192534524201, 0.123656098231, 0.00859134491322, 0.155819433204, 0.0208770727725, 0.123125503804},
    {1, 20, 0.950, 0.0088814488008, 0.236131193447, 0.00126508949796, 0.248732762772, 0.00544903258143, 0.210818636249},
    {7, 25, 0.683, 0.199955355458, 0.376988615055, 0.182977858319, 0.397960442504, 0.200223385262, 0.376980776603},
    {7, 25, 0.950, 0.14283853851, 0.475766051904, 0.120716688504, 0.493876821806, 0.134915862294, 0.472776044971},
    {50, 100, 0.683, 0.450216524777, 0.549783475223, 0.44526919581, 0.55473080419, 0.450216980229, 0.549783019771},
    {50, 100, 0.950, 0.403831530366, 0.596168469634, 0.398321129503, 0.601678870497, 0.403173950896, 0.596826049104},
    {2, 7, 0.683, 0.15048704338, 0.474573137717, 0.103523597493, 0.545768734232, 0.152611461235, 0.475062540252},
    {2, 7, 0.950, 0.0822189240041, 0.641065548167, 0.0366925661761, 0.709579136263, 0.0647282669495, 0.647661654959},
    {0, 10, 0.683, 0, 0.0910151999663, 0, 0.168230623728, 0, 0.0923996136719},
    {0, 10, 0.950, 0, 0.277532799863, 0, 0.308497107819, 0, 0.217196267509},
    {10, 10, 0.683, 0.908984800034, 1, 0.831769376272, 1, 0.907600386328, 1},
    {10, 10, 0.950, 0.722467200137, 1, 0.691502892181, 1, 0.782803732491, 1},
};

int main(void) {
  static const dt_binom_method meth[3] = {DT_BINOM_WILSON, DT_BINOM_EXACT, DT_BINOM_JEFFREYS};
  for (size_t i = 0; i < sizeof ref / sizeof ref[0]; i++)
    for (int m = 0; m < 3; m++) {
      double lo, hi;
      long k = (long)ref[i][0], n = (long)ref[i][1];
      int rc = dt_binom_interval(k, n, ref[i][2], meth[m], &lo, &hi);
      CHECK(rc == DT_OK, "%s k=%ld n=%ld cl=%.3f returns OK", dt_binom_method_name(meth[m]), k, n, ref[i][2]);
      CHECK_CLOSE(lo, ref[i][3 + 2 * m], 1e-9, "%s k=%ld n=%ld cl=%.3f lower (SciPy 1.10)",
                  dt_binom_method_name(meth[m]), k, n, ref[i][2]);
      CHECK_CLOSE(hi, ref[i][4 + 2 * m], 1e-9, "%s k=%ld n=%ld cl=%.3f upper (SciPy 1.10)",
                  dt_binom_method_name(meth[m]), k, n, ref[i][2]);
    }

  /* Closed forms of the published definitions at k = 0 and k = n:
   * Clopper-Pearson (Brown, Cai & DasGupta 2001, section 4.2.2): the upper
   * end at k = 0 solves (1-p)^n = a/2, so p = 1 - (a/2)^(1/n); at k = n
   * the lower end is (a/2)^(1/n).
   * Wilson (same paper, eq. 4) at k = 0: upper = z^2 / (n + z^2). */
  for (long n = 1; n <= 200; n *= 3) {
    double lo, hi, a = 0.05, z = 1.959963984540054; /* z_{0.975}, Abramowitz & Stegun table 26.5 */
    dt_binom_interval(0, n, 0.95, DT_BINOM_EXACT, &lo, &hi);
    CHECK_CLOSE(hi, 1 - pow(a / 2, 1.0 / (double)n), 1e-10, "exact k=0 n=%ld: 1-(a/2)^(1/n) (BCD 2001 4.2.2)", n);
    dt_binom_interval(n, n, 0.95, DT_BINOM_EXACT, &lo, &hi);
    CHECK_CLOSE(lo, pow(a / 2, 1.0 / (double)n), 1e-10, "exact k=n=%ld: (a/2)^(1/n) (BCD 2001 4.2.2)", n);
    dt_binom_interval(0, n, 0.95, DT_BINOM_WILSON, &lo, &hi);
    CHECK_CLOSE(hi, z * z / ((double)n + z * z), 1e-10, "wilson k=0 n=%ld: z^2/(n+z^2) (BCD 2001 eq. 4)", n);
  }

  /* Wilson's interval is symmetric under k -> n-k (common practice: the
   * score interval of 1-p is 1 minus that of p). */
  double l1, h1, l2, h2;
  dt_binom_interval(4, 17, 0.9, DT_BINOM_WILSON, &l1, &h1);
  dt_binom_interval(13, 17, 0.9, DT_BINOM_WILSON, &l2, &h2);
  CHECK_CLOSE(l1, 1 - h2, 1e-12, "wilson symmetric under k -> n-k");

  double lo, hi;
  CHECK(dt_binom_interval(0, 0, 0.683, DT_BINOM_WILSON, &lo, &hi) == DT_EINVAL && isnan(lo), "n = 0 is refused");
  CHECK(dt_binom_interval(5, 4, 0.683, DT_BINOM_EXACT, &lo, &hi) == DT_EINVAL, "k > n is refused");
  CHECK(dt_binom_interval(1, 4, 1.0, DT_BINOM_JEFFREYS, &lo, &hi) == DT_EINVAL, "cl = 1 is refused");
  dt_binom_method m;
  CHECK(dt_binom_method_parse("jeffreys", &m) == DT_OK && m == DT_BINOM_JEFFREYS, "parse 'jeffreys'");
  CHECK(dt_binom_method_parse("agresti", &m) == DT_EINVAL, "unknown method refused");
  return dt_test_done();
}
