/* Probe for the reference tests: fits ellipses to point sets read from stdin.
 *
 * Input: repeated blocks "N" followed by N lines "x y". Output per block, one line:
 * "cx cy a b theta" (image coordinates, theta in radians from +x towards +y, a >= b) with 17
 * significant digits, or "FAIL" when sp_ellipse_fit rejects the points. */
#include "detect/ellipse.h"

#include <stdio.h>
#include <stdlib.h>

int main(void)
{
    int n;
    while (scanf("%d", &n) == 1) {
        if (n < 0 || n > 10000000)
            return 2;
        double *xy = malloc(sizeof *xy * 2 * (size_t)(n > 0 ? n : 1));
        if (!xy)
            return 1;
        for (int i = 0; i < 2 * n; i++)
            if (scanf("%lf", &xy[i]) != 1) {
                free(xy);
                return 2;
            }
        sp_ellipse e;
        if (sp_ellipse_fit(xy, n, &e) == 0)
            printf("%.17g %.17g %.17g %.17g %.17g\n", e.cx, e.cy, e.a, e.b, e.theta);
        else
            printf("FAIL\n");
        free(xy);
    }
    return 0;
}
