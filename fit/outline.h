/*
 * fit/outline.h - the outlines of a part found in an image, without any
 * model: Otsu threshold with automatic polarity, the part as the largest
 * suitable connected component, boundary tracing of the outer edge and every
 * hole, sub-pixel edge positions measured at full resolution along the
 * normals, and resampling by arc length.
 *
 * Where the work is done. Threshold, components and tracing run on one
 * coarse pyramid level (config `level`, default 2 = quarter size), which is
 * cheap; full resolution is read only in small windows along the traced
 * outlines. Holes smaller than about 2^(level+1) px across may vanish at the
 * working level and then are not found: lower `level` for parts with tiny
 * holes.
 *
 * Rules, in the order they are applied:
 *   1. Threshold. Otsu's threshold t on the 256-bin histogram of the working
 *      level: the dark class is grey <= t, the bright class grey > t (the
 *      convention of skimage.filters.threshold_otsu). No part (MB_ENOPART)
 *      when the class means differ by less than min_contrast or Otsu's
 *      separability eta (between-class over total variance) is below
 *      min_separability: a one-colour or pure-texture frame. One global
 *      threshold needs fairly even lighting: on the synthetic line
 *      (capture/synth.h) parts were found with frame corners up to 35 %
 *      darker than the centre, not at 50 %, where Otsu splits the field
 *      itself (no flat-field correction is made here).
 *   2. Polarity. The part is the class holding fewer of the pixels of the
 *      level's border (first and last row and column); on a tie, the class
 *      with fewer pixels overall; on a further tie, the dark class. So a
 *      dark part on a bright back light and a grey part on a darker belt are
 *      both found, as long as the field fills most of the frame border.
 *   3. Components. Part-class pixels are grouped 8-connected, field-class
 *      pixels 4-connected (the pairing that makes every outline a simple
 *      closed curve). Part components smaller than min_blob_area are specks
 *      and ignored. The largest remaining component is the part. None:
 *      MB_ENOPART. It touches the level's border: MB_EEDGE (part cut by the
 *      frame edge). Smaller than min_part_area: MB_EDEGENERATE. Other
 *      components at least min_part_area large are counted (two parts in
 *      view) and reported, not used.
 *   4. Holes: field components that do not touch the border, whose
 *      surrounding component is the part, at least min_hole_area large. At
 *      most MB_MAX_OUTLINES - 1, the largest kept (the rest counted).
 *   5. Tracing: the boundary between each component and the rest, followed
 *      along pixel cracks at the working level, each crack giving the point
 *      where the grey level crosses t + 0.5 between the two pixel centres
 *      (linear interpolation; marching squares with the ambiguous corners
 *      resolved by the component connectivity of rule 3).
 *   6. Sub-pixel edges, at full resolution: every traced point is first
 *      moved along its normal to the crossing of the mid grey level of the
 *      two classes; the outline is resampled; every resampled point is then
 *      measured by a least-squares fit of a blurred step edge
 *      (a + (b - a) Phi((d - e) / sigma)) to the raw pixels of a strip
 *      across the edge (edge_across px each side, edge_along px wide),
 *      with the outline's local curvature in the model, and corrected for
 *      the shift of a blurred curved edge towards its centre of curvature
 *      (kappa sigma^2 / 2). See outline.c.
 *   7. Orientation: every outline runs with the part on its right-hand side
 *      on screen (x right, y down): the outer edge clockwise on screen, i.e.
 *      positive shoelace sum  sum_i (x_i y_{i+1} - x_{i+1} y_i), holes
 *      counter-clockwise on screen (negative sum).
 *   8. Order: outer edge first, then holes by decreasing area enclosed by
 *      their traced outline (step 6's first move).
 *   9. Points per outline: proportional to the outline's length, at least
 *      min_points each, summing exactly to `points` (largest remainders;
 *      mb_outline_counts). Points are spaced evenly by arc length.
 *  10. First point of each outline: where the ray from the outline's
 *      centroid (of its enclosed area) towards +x (right on screen) leaves
 *      the outline for the last time (its crossing of largest x); the
 *      traced point of largest x when the ray meets no edge (the centroid
 *      of a bent part can lie outside it, to its right).
 *
 * Coordinates: full-resolution image px, x right, y down, pixel centres at
 * integers (fit/image.h).
 */
#ifndef MB_OUTLINE_H
#define MB_OUTLINE_H

#include <stdint.h>

#include "image.h"
#include "polyline.h"
#include "pyramid.h"
#include "shape.h"

typedef struct {
    int level;            /**< pyramid level for threshold, components and
                               tracing: 0 (full size) .. 6; higher is faster and
                               loses small holes; default 2 */
    int points;           /**< total points over all outlines (the budget);
                               also the capacity of mb_outliner_resample.
                               Each point costs about 1 us. As input to the
                               correspondence solver, which resamples the
                               polygons, keep the spacing near 2 px or
                               finer (a 2 px chord lies 0.03 px inside a
                               circle of radius 16 px); default 1024 */
    int min_points;       /**< fewest points on one outline, >= 3; default 16 */
    double min_blob_area; /**< px^2 (full res): smaller part-class
                               components are specks (dust, noise); a
                               speck's blurred halo covers a few pixels
                               of the working level, so keep this above
                               about 8 * 4^level; default 150 */
    double min_part_area; /**< px^2: a part smaller than this is refused
                               (MB_EDEGENERATE); default 400 */
    double min_hole_area; /**< px^2: smaller holes are ignored; default 40 */
    double min_contrast;  /**< grey levels between the two class means
                               below which there is no part; default 20 */
    double min_separability; /**< Otsu's eta (0..1) below which there is no
                                  part: about 0.64 for Gaussian noise or
                                  texture alone, above 0.9 for a part on a
                                  plain field; default 0.75 */
    double edge_across;      /**< half-length of the edge fit window across the
                                  edge, px (1.5 .. 8): at least 1.5 times the
                                  blur sigma plus a pixel; longer takes in more
                                  field texture and reaches the next edge on thin
                                  walls, and costs time linearly; default 3.5
                                  (blur sigma up to about 2 px) */
    double edge_along;       /**< half-width of the edge fit strip along the
                                  edge, px (0.5 .. 4): wider averages more noise
                                  away (RMS 0.025 -> 0.018 px back-lit, 0.071 ->
                                  0.058 px front-lit from 1 to 2 px on the test
                                  parts) but rounds sharp corners; default 2 */
} mb_outline_config;

/** Otsu's threshold of a histogram (Otsu, IEEE SMC 9(1), 1979). */
typedef struct {
    int threshold; /**< t: the dark class is grey <= t */
    double eta;    /**< separability: between-class / total variance */
    double mean_dark, mean_bright; /**< class means, grey levels */
    double weight_dark;            /**< fraction of pixels in the dark class */
} mb_otsu;

/** The outlines of one part. Filled by mb_outliner_run. */
typedef struct {
    mb_layout layout;         /**< outer edge first, then holes (rule 8) */
    const double *points;     /**< 2 * layout.n_points values x0, y0, x1, ...
                                   in px; owned by the outliner, valid until its
                                   next run, resample or close */
    mb_polyline_set outlines; /**< the same points as a polyline set (input of
                                   fit/correspond.h); xy == points */
    double length[MB_MAX_OUTLINES];  /**< perimeter of the polygon through
                                          the measured points, px (short of
                                          the curve by about (2 pi / n)^2 / 24
                                          on a circle of n points) */
    double area[MB_MAX_OUTLINES];    /**< area of that polygon, px^2, > 0 */
    double spacing[MB_MAX_OUTLINES]; /**< mean distance between
                                          consecutive points, length / count,
                                          px (points are placed evenly by arc
                                          length along the traced outline) */
    mb_otsu otsu;                    /**< threshold at the working level */
    int part_dark;                   /**< 1 when the part is the dark class */
    int box[4];            /**< part bounding box x, y, width, height, full
                                res px (from the working level, so rounded
                                to 2^level) */
    double part_area;      /**< area of the chosen component, px^2 (pixel
                                count at the working level times 4^level) */
    int candidates;        /**< components at least min_part_area large,
                                the part included (2 or more: several parts
                                in view, the largest used) */
    double runner_up_area; /**< the largest other such component, px^2; 0
                                when none */
    int holes_dropped;     /**< holes beyond MB_MAX_OUTLINES - 1 left out */
    int unrefined;         /**< points whose edge fit failed (kept on the
                                coarse outline, accurate to a few tenths) */
    double blur;           /**< median blur sigma of the fitted edges, px
                                (optics plus the pixel footprint) */
    double contrast;       /**< median |b - a| of the fitted edges, grey */
} mb_outline_result;

typedef struct mb_outliner mb_outliner;

/** Fill cfg with the defaults documented above. */
void mb_outline_config_default(mb_outline_config *cfg);

/** hist[g] = number of pixels of grey g in img. Allocates nothing. */
void mb_outline_histogram(const mb_image *img, uint32_t hist[256]);

/**
 * Otsu's threshold of a 256-bin histogram: the t that maximises the
 * between-class variance of {g <= t} and {g > t}; the smallest such t on
 * ties (as numpy.argmax does in skimage). Exact integer class sums, so the
 * choice does not depend on summation order.
 * Return value: 0; MB_EINVAL for NULL; MB_EDEGENERATE when fewer than two
 * grey values occur (no threshold separates anything; *out then holds that
 * value as threshold, eta 0).
 */
int mb_outline_threshold(const uint32_t hist[256], mb_otsu *out);

/**
 * Points per outline for a budget (rule 9): counts proportional to
 * lengths[i], each >= min_points, summing to `points`, by largest remainders
 * (ties to the earlier outline); each is capped at MB_MAX_OUTLINE_POINTS.
 * Return value: 0; MB_EINVAL for bad arguments; MB_ERANGE when points <
 * n * min_points or points > n * MB_MAX_OUTLINE_POINTS.
 */
int mb_outline_counts(const double *lengths, int n, int points, int min_points,
                      mb_layout *layout);

/**
 * Make an outliner for width x height frames: checks cfg and allocates
 * every buffer (its pyramid, labels, traces, points); running it allocates
 * nothing.
 * Return value: 0; MB_EINVAL (bad size or a config field out of range; err
 * names the field); MB_ENOMEM. On failure *out is NULL.
 */
int mb_outliner_create(int width, int height, const mb_outline_config *cfg,
                       mb_outliner **out, char *err);

/** Free an outliner. NULL-safe. */
void mb_outliner_close(mb_outliner *o);

/**
 * Find the part in frame and measure its outlines into res (rules 1-10).
 * The frame must stay alive and unchanged until the next run if
 * mb_outliner_resample is to be used.
 * Return value: 0; MB_EINVAL (NULL argument); MB_ESIZE (frame size is not
 * the outliner's); MB_ENOPART (no contrast, or no component); MB_EEDGE (the
 * part touches the frame edge); MB_EDEGENERATE (part smaller than
 * min_part_area, or more outlines than the budget can give min_points
 * each). On an error err holds a sentence
 * and res->layout.n_outlines is 0; res->otsu, part_dark, box, part_area,
 * candidates are filled as far as the run got.
 */
int mb_outliner_run(mb_outliner *o, const mb_image *frame,
                    mb_outline_result *res, char *err);

/**
 * As mb_outliner_run, on a pyramid the caller has built (for example the
 * one the search uses). pyr must have at least level + 1 levels and level 0
 * of the outliner's frame size; it must stay built until the next run if
 * mb_outliner_resample is to be used.
 */
int mb_outliner_run_pyramid(mb_outliner *o, const mb_pyramid *pyr,
                            mb_outline_result *res, char *err);

/**
 * Resample the outlines of the last successful run with a given layout
 * instead of the budget (for example the layout of a reference image, so
 * that every training image has the same counts) and measure the points
 * again. The frame or pyramid of that run must still be alive. *res is
 * overwritten: what the run found, with the new points, lengths, areas,
 * spacings and fit figures. Allocates nothing.
 * Return value: 0; MB_EINVAL (NULL, no previous run, bad layout);
 * MB_ESIZE (layout has another number of outlines than the run found, or
 * more points than the budget).
 */
int mb_outliner_resample(mb_outliner *o, const mb_layout *layout,
                         mb_outline_result *res, char *err);

#endif
