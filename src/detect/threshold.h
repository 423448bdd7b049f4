/* Global thresholds. */
#ifndef SP_DETECT_THRESHOLD_H
#define SP_DETECT_THRESHOLD_H

#include "spume.h"

/* Otsu (1979): the split of a histogram that maximises the between-class variance.
 * Returns t such that class 0 is bins 0..t and class 1 bins t+1..nbins-1; ties go to the lowest t
 * (the rule skimage.filters.threshold_otsu follows). Returns -1 when the histogram has fewer than
 * two occupied bins, more than 65536 bins, or more than 2^48 counts in all (the bound that keeps
 * the exact comparison of candidate splits exact). */
int sp_otsu_hist(const uint64_t *hist, int nbins);

#endif
