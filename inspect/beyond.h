/*
 * inspect/beyond.h - material beyond the measured edge.
 *
 * A thin fibre or a speck of contamination lying across the part's edge
 * leaves the edge itself where the model says (the edge finder finds the
 * part's edge under it), so the local-deviation check cannot see it. This
 * check looks past the edge instead: along the normal of every dense sample
 * (fit/asm.h), at 3, 5 and 7 px beyond the measured edge, the grey level
 * must stay with the background: the background is measured round the part
 * in the frame itself (median and spread of the grey 5 px out at up to 256
 * dense samples), and a point looks like the part when it lies on the
 * part's side of that median by more than a third of the taught contrast
 * and more than 8 times the spread. A run of samples where two of the three
 * points look like the part is material that does not belong there -
 * unless the fitted model itself has material there (a lip beside a heel, a
 * slot). Only full-resolution pixels next to the outline are read.
 */
#ifndef MB_BEYOND_H
#define MB_BEYOND_H

#include <stdint.h>

#include "asm.h"
#include "image.h"

typedef struct {
    int found;       /**< 1: material beyond the edge */
    int first, len;  /**< dense samples of the longest run */
    int worst;       /**< its middle sample */
} mb_beyond;

/**
 * Look beyond the edge of every valid dense sample of res on frame.
 * corner: NULL, or per landmark 1 where the segment from it to the next
 * one has a sharp corner (its dense samples are left out); part_grey,
 * back_grey: taught levels; min_run: samples in a run that make a finding
 * (2 is about 2 px at 1 px spacing). Allocates nothing.
 */
void mb_beyond_check(const mb_image *frame, const mb_asm_result *res,
                     const mb_layout *layout, const uint8_t *corner,
                     double part_grey, double back_grey, int min_run,
                     mb_beyond *out);

/**
 * The same look on the part's face beside its edge (3, 5 and 7 px inside
 * the measured edge, where the fitted model has material out to 10 px): a
 * run of samples whose grey differs from the part face's own level (median
 * round the part in this frame) by more than a third of the taught contrast
 * and 8 times the face's spread, either way: dirt or a fibre lying on the
 * part (visible under front light), or light through a hole or thin spot
 * (under back light). Arguments and result as mb_beyond_check.
 */
void mb_spot_check(const mb_image *frame, const mb_asm_result *res,
                   const mb_layout *layout, const uint8_t *corner,
                   double part_grey, double back_grey, int min_run,
                   mb_beyond *out);

#endif
