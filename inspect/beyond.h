/*
 * inspect/beyond.h - material beyond the measured edge.
 *
 * A thin fibre or a speck of contamination lying across the part's edge
 * leaves the edge itself where the model says (the edge finder finds the
 * part's edge under it), so the local-deviation check cannot see it. This
 * check looks past the edge instead: along the normal of every dense sample
 * (fit/asm.h), at 3, 5 and 7 px beyond the measured edge, the grey level
 * must be on the background's side of the mid grey between the taught part
 * and background levels. A run of samples where two of the three points
 * look like the part is material that does not belong there - unless the
 * fitted model itself has material there (a lip beside a heel, a slot).
 * Only full-resolution pixels next to the outline are read.
 */
#ifndef MB_BEYOND_H
#define MB_BEYOND_H

#include "asm.h"
#include "image.h"

typedef struct {
    int found;       /**< 1: material beyond the edge */
    int first, len;  /**< dense samples of the longest run */
    int worst;       /**< its middle sample */
} mb_beyond;

/**
 * Look beyond the edge of every valid dense sample of res on frame.
 * part_grey, back_grey: taught levels; min_run: samples in a run that make
 * a finding (2 is about 2 px at 1 px spacing). Allocates nothing.
 */
void mb_beyond_check(const mb_image *frame, const mb_asm_result *res,
                     const mb_layout *layout, double part_grey,
                     double back_grey, int min_run, mb_beyond *out);

#endif
