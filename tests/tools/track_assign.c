/* Probe for the reference tests: solves dense assignment problems read from stdin.
 *
 * Input: repeated blocks "NR NC" followed by NR·NC costs, row-major ("inf" = forbidden).
 * Output per block, one line: "OK total c_0 ... c_{NR-1}" (column per row, -1 = none, total with
 * 17 significant digits), or "FAIL message". */
#include "track/assign.h"

#include <stdio.h>
#include <stdlib.h>

int main(void)
{
    int nr, nc;
    while (scanf("%d %d", &nr, &nc) == 2) {
        if (nr < 0 || nc < 0 || (long long)nr * nc > 10000000)
            return 2;
        double *c = malloc(sizeof *c * (size_t)(nr * nc + 1));
        int *col = malloc(sizeof *col * (size_t)(nr + 1));
        if (!c || !col)
            return 1;
        for (int i = 0; i < nr * nc; i++)
            if (scanf("%lf", &c[i]) != 1)
                return 2;
        sp_error err;
        double tot;
        if (sp_assign_dense(c, nr, nc, col, &tot, &err) == 0) {
            printf("OK %.17g", tot);
            for (int i = 0; i < nr; i++)
                printf(" %d", col[i]);
            printf("\n");
        } else {
            printf("FAIL %s\n", err.msg);
        }
        free(c);
        free(col);
    }
    return 0;
}
