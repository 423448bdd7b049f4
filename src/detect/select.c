/* Order statistics by quickselect; the contract is in select.h. */
#include "detect/select.h"

float sp_select_float(float *v, size_t n, size_t k)
{
    size_t lo = 0, hi = n - 1;
    while (hi > lo) {
        size_t mid = lo + (hi - lo) / 2;
        float a = v[lo], b = v[mid], c = v[hi];
        float piv = a < b ? (b < c ? b : (a < c ? c : a)) : (a < c ? a : (b < c ? c : b));
        size_t i = lo, j = hi;
        while (i <= j) {
            while (v[i] < piv)
                i++;
            while (v[j] > piv)
                j--;
            if (i <= j) {
                float t = v[i];
                v[i] = v[j];
                v[j] = t;
                i++;
                if (j == 0)
                    break;
                j--;
            }
        }
        if (k <= j && j < i)
            hi = j;
        else if (k >= i)
            lo = i;
        else
            return v[k];
    }
    return v[k];
}
