/* Minimal test harness: CHECK records a failure and goes on; the test's main returns
 * check_report(), which prints "N passed, N failed" and is non-zero on any failure. */
#ifndef SP_TEST_CHECK_H
#define SP_TEST_CHECK_H

#include <math.h>
#include <stdio.h>

static int check_pass_, check_fail_;

#define CHECK(cond, ...)                                                                                        \
    do {                                                                                                       \
        if (cond) {                                                                                            \
            check_pass_++;                                                                                     \
        } else {                                                                                               \
            check_fail_++;                                                                                     \
            fprintf(stderr, "%s:%d: check failed: %s: ", __FILE__, __LINE__, #cond);                           \
            fprintf(stderr, __VA_ARGS__);                                                                      \
            fputc('\n', stderr);                                                                               \
        }                                                                                                      \
    } while (0)

#define CHECK_NEAR(a, b, tol, what)                                                                             \
    CHECK(fabs((double)(a) - (double)(b)) <= (tol), "%s: %.9g vs %.9g (tol %g)", what, (double)(a), (double)(b), \
          (double)(tol))

static inline int check_report(void)
{
    printf("%d passed, %d failed\n", check_pass_, check_fail_);
    return check_fail_ ? 1 : 0;
}

#endif
