/* Minimal test harness for doubletty's unit tests.
 *
 * Each test program calls CHECK / CHECK_CLOSE and ends with
 * `return dt_test_done();`, which prints the closing line
 * "N passed, N failed" that tests/run adds up.  A check prints one line
 * ("ok" or "FAIL") naming what it checks; failures also say where. */
#ifndef DT_TEST_HARNESS_H
#define DT_TEST_HARNESS_H
#include <math.h>
#include <stdio.h>

static int dt_test_pass_, dt_test_fail_;

#define CHECK(cond, ...)                                                    \
  do {                                                                      \
    if (cond) { dt_test_pass_++; printf("ok   - "); }                      \
    else { dt_test_fail_++; printf("FAIL - %s:%d: ", __FILE__, __LINE__); } \
    printf(__VA_ARGS__); printf("\n");                                      \
  } while (0)

/* |got - want| <= tol  (absolute) */
#define CHECK_CLOSE(got, want, tol, ...)                                    \
  do {                                                                      \
    double g_ = (got), w_ = (want), t_ = (tol);                             \
    int ok_ = isfinite(g_) && fabs(g_ - w_) <= t_;                          \
    CHECK(ok_, __VA_ARGS__);                                                \
    if (!ok_) printf("       got %.10g want %.10g tol %.3g\n", g_, w_, t_); \
  } while (0)

/* |got - want| <= rtol * |want|  (relative) */
#define CHECK_REL(got, want, rtol, ...)                                     \
  CHECK_CLOSE(got, want, fabs((double)(want)) * (rtol), __VA_ARGS__)

static inline int dt_test_done(void) {
  printf("%d passed, %d failed\n", dt_test_pass_, dt_test_fail_);
  return dt_test_fail_ ? 1 : 0;
}
#endif
