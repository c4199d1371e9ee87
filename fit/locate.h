/*
 * fit/locate.h - coarse location of a part in a frame: where it is, how big,
 * and which way round, from one coarse pyramid level, as start poses for the
 * Active Shape Model search (fit/asm.h).
 *
 * Rules, in order, on pyramid level `level` (default 3: 160 x 128 for a
 * 1280 x 1024 frame):
 *   1. Threshold: Otsu's threshold of the level's histogram
 *      (mb_outline_threshold). No part (MB_ENOPART) when the two class
 *      means differ by less than min_contrast times the taught contrast
 *      |part_grey - back_grey| (fit/profile.h): a one-colour or texture-only
 *      frame.
 *   2. Polarity is the taught one: the part is the dark class when the part
 *      was darker than the background in teaching.
 *   3. Components: part-class pixels, 8-connected. The part is the largest.
 *      Its area (pixel count times 4^level) must lie within min_area ..
 *      max_area times the taught area, else MB_ENOPART (nothing of this
 *      part's size is in view).
 *   4. Frame edge: when the part's component touches the level's border,
 *      the full-resolution border pixels are read (only those) and a run of
 *      at least 3 part-class pixels there means the part is cut by the frame
 *      edge: MB_EEDGE.
 *   5. Another component at least other_area times the taught area large:
 *      MB_EMULTIPLE (two or more parts in view).
 *   6. Pose candidates, model frame -> image px: the scale from the area
 *      (sqrt(area / model area)), the translation from the region centroid,
 *      the angle from the principal axes of the second moments of the image
 *      region and of the model's mean shape (region moments by Green's
 *      theorem, holes subtracted):
 *        - rotation-symmetric model (every outline's radius about the
 *          part's centroid constant within symmetry_tol): one candidate,
 *          angle 0 (any angle fits);
 *        - orientation unknown (minor/major second moment ratio of the
 *          model or the image region above round_ratio, e.g. a square
 *          flange): n_round_angles candidates evenly spaced over 360 deg;
 *        - otherwise the two angles that align the principal axes, 180 deg
 *          apart (second moments cannot tell them apart).
 *      The search tries them all on the coarsest level and keeps the best.
 *
 * Only the working level is read, plus the frame border of level 0 in rule
 * 4: nothing of full resolution inside the frame. The workspace is made
 * once per model and frame size; mb_locate_run allocates nothing.
 */
#ifndef MB_LOCATE_H
#define MB_LOCATE_H

#include "profile.h"
#include "pyramid.h"
#include "shape.h"
#include "shape_model.h"

/** Most start poses one location gives. */
#define MB_LOCATE_MAX_CANDIDATES 16

typedef struct {
    int level;           /**< pyramid level to work on, 0 .. 7; coarser is
                              faster and blurs small parts away: keep the
                              part at least ~20 px across there; default 3 */
    double min_contrast; /**< 0..1: fraction of the taught contrast the two
                              Otsu classes must differ by; default 0.35 */
    double min_area;     /**< smallest part, as a fraction of the taught
                              area; default 0.4 */
    double max_area;     /**< largest part, fraction of the taught area;
                              default 2.5 */
    double other_area;   /**< a second component at least this fraction of
                              the taught area is a second part; default 0.25 */
    double round_ratio;  /**< 0..1: minor/major second moment ratio above
                              which the orientation counts as unknown;
                              default 0.85 */
    int n_round_angles;  /**< start angles tried when the orientation is
                              unknown, 1 .. MB_LOCATE_MAX_CANDIDATES; each
                              costs a coarse-level search; default 8 */
    double symmetry_tol; /**< a model whose every outline keeps its radius
                              about the part centroid within this fraction is
                              rotation-symmetric (an oval ring: the search
                              turns the model to its ovality from any start;
                              a hexagon varies 7 %, a square 20 %); default
                              0.03 */
} mb_locate_params;

typedef struct {
    int n_candidates;  /**< start poses in candidates (0 on failure) */
    mb_pose candidates[MB_LOCATE_MAX_CANDIDATES]; /**< model frame -> image
                                                       px */
    double x, y;       /**< centroid of the part region, full-res px */
    double area;       /**< part area, px^2 (0 when no component) */
    double angle;      /**< principal axis of the part region, radians,
                            (-pi/2, pi/2], x right, y down */
    double roundness;  /**< minor/major second moment ratio, 0..1 */
    int threshold;     /**< Otsu threshold of the working level */
    int part_dark;     /**< 1 when the part is the dark class */
    double contrast;   /**< difference of the Otsu class means, grey */
    int n_parts;       /**< components at least other_area large, the part
                            included */
    double other_area; /**< the largest other component, px^2 */
    int box[4];        /**< part bounding box x, y, width, height, full-res
                            px (rounded to 2^level) */
    int edges;         /**< frame edges the part region touches: MB_EDGE_*
                            bits (0 when wholly inside) */
} mb_locate_result;

/* Bits of mb_locate_result.edges. */
enum { MB_EDGE_LEFT = 1, MB_EDGE_TOP = 2, MB_EDGE_RIGHT = 4, MB_EDGE_BOTTOM = 8 };

typedef struct mb_locate mb_locate;

/** Fill p with the defaults documented above. */
void mb_locate_params_default(mb_locate_params *p);

/**
 * Make a locator for one model and width x height frames. Reads the mean
 * shape of sm (its region moments, symmetry) and the taught grey levels and
 * area of pm.
 * Return value: 0; MB_EINVAL (NULL, a parameter out of range, frame size
 * outside 1..65536, or a level that leaves less than 4 x 4 px); MB_ESIZE
 * (the models' layouts differ); MB_EDEGENERATE (the mean shape has no area,
 * or the taught contrast is zero); MB_ENOMEM.
 */
int mb_locate_create(const mb_shape_model *sm, const mb_profile_model *pm,
                     int width, int height, const mb_locate_params *p,
                     mb_locate **out, char *err);

/** Free a locator. NULL-safe. */
void mb_locate_close(mb_locate *loc);

/**
 * Locate the part on pyr (built from the frame; at least level + 1 levels).
 * res is always filled as far as the run got. Allocates nothing.
 * Return value: 0 (res->n_candidates >= 1); MB_EINVAL (NULL); MB_ESIZE
 * (pyramid of another frame size or too few levels); MB_ENOPART (rules 1
 * and 3); MB_EEDGE (rule 4); MB_EMULTIPLE (rule 5).
 */
int mb_locate_run(mb_locate *loc, const mb_pyramid *pyr,
                  mb_locate_result *res);

/** The working level (for callers that size their pyramid). */
int mb_locate_level(const mb_locate *loc);

/** 1 when the model counts as rotation-symmetric (one start angle). */
int mb_locate_symmetric(const mb_locate *loc);

#endif
