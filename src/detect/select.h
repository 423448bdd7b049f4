/* Order statistics of float arrays (internal to the detect layer). */
#ifndef SP_DETECT_SELECT_H
#define SP_DETECT_SELECT_H

#include <stddef.h>

/* The k-th smallest (0-based, k < n) of v[0..n), by Hoare's quickselect with a median-of-three pivot,
 * in place: afterwards v[0..k) <= v[k] <= v(k..n), so the next order statistic is the smallest of
 * v(k..n). The result equals the sorted array's element k whatever the input order. */
float sp_select_float(float *v, size_t n, size_t k);

#endif
