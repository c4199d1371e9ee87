/*
 * fit/polyline.h - the dense closed outlines of one part, as found in an
 * image, before correspondence.
 *
 * A plain value type (no functions): the outliner fills it, the
 * correspondence solver (fit/correspond.h) reads it. Nothing is owned: xy
 * points into the producer's memory.
 *
 * Outlines are closed: the last point joins the first (it may repeat the
 * first point; zero-length steps are ignored). Outline 0 is the outer edge,
 * then the holes in any order. Each outline may have its own point count and
 * either direction of traversal; points need not be evenly spaced.
 * Coordinates in image pixels, x right, y down, pixel centres at integers.
 */
#ifndef MB_POLYLINE_H
#define MB_POLYLINE_H

#include "shape.h"

typedef struct {
    int n_outlines;              /**< 1 .. MB_MAX_OUTLINES: outer edge, holes */
    int counts[MB_MAX_OUTLINES]; /**< points per outline, each >= 3 */
    const double *xy;            /**< x0, y0, x1, y1, ... of all outlines one
                                      after the other, 2 * sum(counts) values,
                                      px; not owned */
} mb_polyline_set;

#endif
