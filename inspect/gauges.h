/*
 * inspect/gauges.h - drawing gauges measured on the measured outline.
 *
 *   DIAMETER   least-squares circle through the outline's points, algebraic
 *              fit of Kasa (IEEE Trans. Instrum. Meas. 25(1), 1976):
 *              minimise sum (x^2 + y^2 + D x + E y + F)^2, centre (-D/2,
 *              -E/2), r^2 = (D^2 + E^2)/4 - F; unbiased enough for closed
 *              outlines, which is what gaskets and O-rings give.
 *   WIDTH_MIN  least caliper width: the smallest, over the edges of the
 *   WIDTH_MAX  convex hull, of the hull's extent normal to the edge; the
 *              greatest caliper width is the hull's diameter (rotating
 *              calipers, Shamos 1978).
 *   SPACING    distance between the area centroids of two outlines.
 *   LENGTH     perimeter of the closed outline.
 *   AREA       area enclosed by the outline (shoelace).
 * Lengths in px are turned into mm by a scale (mm per px); a calibration
 * maps points to the plane first (the caller converts the points).
 */
#ifndef MB_GAUGES_H
#define MB_GAUGES_H

#include "part_model.h"

/** Kasa circle fit of n points. Return value: 0; MB_EDEGENERATE (n < 3 or
    collinear points). */
int mb_gauge_circle(const double *xy, int n, double *cx, double *cy,
                    double *r);

/** Caliper widths of n points (convex hull by the monotone chain, Andrew
    1979). work: 2n doubles + n ints worth of scratch (3n doubles). */
int mb_gauge_calipers(const double *xy, int n, double *wmin, double *wmax,
                      double *work);

/** Area (absolute shoelace) and centroid of a closed outline. */
double mb_gauge_area(const double *xy, int n, double *cx, double *cy);

/** Perimeter of a closed outline. */
double mb_gauge_length(const double *xy, int n);

/**
 * Measure gauge g on the outlines xy (layout order) with points already in
 * mm (or px with mm_per_px applied by the caller). work: 3 * largest outline
 * doubles. *value gets the measurement.
 * Return value: 0; MB_EINVAL (outline index out of range); MB_EDEGENERATE.
 */
int mb_gauge_measure(const mb_gauge_def *g, const mb_layout *layout,
                     const double *xy, double *work, double *value);

/** Name of a gauge kind, as used in files ("diameter", "width-min", ...). */
const char *mb_gauge_kind_name(mb_gauge_kind k);
/** Kind from its name; 0 when unknown. */
mb_gauge_kind mb_gauge_kind_from_name(const char *name);

#endif
