/*
 * capture/synth.h - the synthetic production line: a deterministic, seeded
 * generator of realistic 8-bit frames of flexible parts, each with its exact
 * ground truth (the outlines that were rendered, the pose, the defect).
 *
 * Part families (all invented demo parts; part numbers are made up):
 *   ring     RG-4030  flat ring gasket, outer diameter 40 mm, inner 30 mm;
 *                     rotation-symmetric, no orientation feature.
 *   flange   FG-3426  flange gasket 34 x 26 mm with 5 mm corner radii, a
 *                     stadium-shaped inner opening 18 x 9 mm and four bolt
 *                     holes of 3.2 mm diameter.
 *   hose     HS-0642  curved hose segment, 6 mm wide, 42 mm long along its
 *                     centre line, bent by about 70 degrees (varies).
 *   lipseal  LS-2218  lip seal cross-section: a 20 x 8 mm heel with a
 *                     tapered sealing lip about 9 mm long leaning out at
 *                     35 degrees; 22 mm wide overall.
 *
 * Every part varies naturally (size, ovality, bending, thickness, hole
 * positions; a few independent factors per family, so a model of a few modes
 * captures the good parts), lies anywhere in the field at any rotation and
 * fully inside the frame. Defects, each with a recorded size and location,
 * are listed with mb_synth_defect_type.
 *
 * Determinism: frame and truth are a pure function of (config, part index,
 * shot). The random streams for a part's shape, its defect, its placement
 * and the sensor noise are separate, so the same part index gives the same
 * physical part whatever its defect draw or how often it is imaged (shot).
 * The generator uses its own PRNG (xoshiro256** seeded by splitmix64).
 *
 * Coordinates: image px, x right, y down, pixel centres at integers; part
 * frame in mm with the same handedness; angles in radians (files and
 * reports use degrees).
 *
 * Imaging: exact area-coverage anti-aliasing (capture/render.h), Gaussian
 * optical blur, uneven illumination (vignetting plus a linear gradient,
 * fixed per generator, like one station's lamp), Gaussian sensor noise,
 * rounding to 8 bits. Back-lit: a dark part on a bright field. Front-lit: a
 * grey part on a darker textured belt (lower contrast).
 *
 * Pure computation: no files, no printing. Memory is allocated once in
 * mb_synth_open; making a frame allocates nothing. A generator is used by
 * one thread at a time (it owns its scratch buffers); separate generators
 * are independent.
 */
#ifndef MB_SYNTH_H
#define MB_SYNTH_H

#include <stdint.h>

#include "image.h"
#include "polyline.h"
#include "shape.h"

typedef enum {
    MB_SYNTH_RING = 0,
    MB_SYNTH_FLANGE,
    MB_SYNTH_HOSE,
    MB_SYNTH_LIPSEAL,
    MB_SYNTH_N_FAMILIES
} mb_synth_family;

typedef enum {
    MB_SYNTH_BACKLIT = 0, /**< dark part on a bright field */
    MB_SYNTH_FRONTLIT     /**< grey part on a textured belt */
} mb_synth_lighting;

/**
 * Defect types and what their recorded size means (mm, on the part):
 *   NONE          good part; size 0.
 *   NICK          notch cut into an edge (V- or U-shaped, 1.2-3 times as
 *                 wide as deep); size = depth, 0.2-2 mm.
 *   FLASH         excess material standing out of an edge over 2-6 mm;
 *                 size = height, 0.2-1.5 mm.
 *   TEAR          narrow slit (0.2-0.5 mm wide) torn into an edge;
 *                 size = depth, 0.6-3 mm.
 *   MISSING       a missing segment: a wide (3-8 mm) flat-bottomed piece
 *                 gone from an edge; size = depth, 1-2.5 mm.
 *   DEFORM        deformation beyond the good range (ring: ovality, flange:
 *                 bow, hose: bend, lipseal: lip angle); size = largest
 *                 distance of the outline from the same part at the edge of
 *                 the good range.
 *   WRONG_SIZE    the whole part scaled 2.5-8 % off; size = change of its
 *                 main dimension (ring outer diameter, flange length, hose
 *                 length, lipseal width).
 *   WRONG_VARIANT a sister part (ring: other inner diameter, flange: a bolt
 *                 hole missing or moved, hose: other width, lipseal: the
 *                 mirrored profile); size = largest distance of the outline
 *                 from the right variant, or the diameter of a missing hole.
 *   CONTAMINATION a blob or fibre of foreign matter touching the part (drawn
 *                 separately; not part of the truth outlines); size = its
 *                 largest extent (blob diameter 0.5-2.5 mm, fibre length
 *                 1.5-6 mm, fibre 0.15-0.3 mm thick).
 *   EMPTY         no part in the frame; size 0.
 *   CUT           a good part cut by the frame edge (bad input for teaching
 *                 and inspection); size = how far it reaches out of the
 *                 frame. Not drawn unless its bit is set in defect_mask.
 * Local defects (NICK .. MISSING, CONTAMINATION) are located on an outline
 * (outline index, arc position, angle about the part origin, image x, y);
 * DEFORM and WRONG_VARIANT at their largest deviation. Sizes are drawn
 * uniformly in the ranges above (or defect_min_mm..defect_max_mm); a local
 * defect is placed only on a smooth stretch of edge, keeps 0.3 mm clear of
 * every other edge, and is made shallower where no position takes its
 * depth: the recorded size is always the one made.
 */
typedef enum {
    MB_SYNTH_NONE = 0,
    MB_SYNTH_NICK,
    MB_SYNTH_FLASH,
    MB_SYNTH_TEAR,
    MB_SYNTH_MISSING,
    MB_SYNTH_DEFORM,
    MB_SYNTH_WRONG_SIZE,
    MB_SYNTH_WRONG_VARIANT,
    MB_SYNTH_CONTAMINATION,
    MB_SYNTH_EMPTY,
    MB_SYNTH_CUT,
    MB_SYNTH_N_DEFECTS
} mb_synth_defect_type;

/** Pass as `defect` to mb_synth_make to draw it from defect_rate and mask. */
#define MB_SYNTH_DRAW (-1)

/** The default defect mask: every type except NONE and CUT. */
#define MB_SYNTH_MASK_DEFAULT                                                  \
    (((1u << MB_SYNTH_N_DEFECTS) - 1u) & ~(1u << MB_SYNTH_NONE) &              \
     ~(1u << MB_SYNTH_CUT))

typedef struct {
    mb_synth_family family;
    int width, height;          /**< frame size, px; default 1280 x 1024 */
    double mm_per_px;           /**< scale on the part plane; default 0.1 */
    mb_synth_lighting lighting; /**< default MB_SYNTH_BACKLIT */
    double noise_sigma;   /**< sensor noise, grey levels; default 2; 0 = none */
    double blur_sigma;    /**< optical blur, px (0..10); default 1; 0 = none */
    double illumination;  /**< uneven illumination: how much darker the
                               corners are than the centre, as a fraction
                               (0..0.5); default 0.12; 0 = flat */
    double variation;     /**< scale of the natural variation of good parts;
                               default 1; 0 gives nominal parts */
    double defect_rate;   /**< probability that mb_synth_next makes a
                               defective part (0..1); default 0 */
    unsigned defect_mask; /**< bit (1u << type) set for each defect type
                               mb_synth_next may draw (uniformly among the
                               set bits); default MB_SYNTH_MASK_DEFAULT */
    double defect_min_mm, defect_max_mm; /**< when max > 0, the size range of
                                              local defects (NICK, FLASH,
                                              TEAR, MISSING, CONTAMINATION)
                                              instead of each type's own */
    uint64_t seed;                       /**< default 1 */
    double drift_per_part; /**< slow drift of the line: every part is
                                scaled by 1 + drift_per_part * part index
                                (e.g. 1e-4: a ring's diameter creeps up
                                0.004 mm per part), the creep held at +-5 %
                                (the frame's allowance); default 0; at most
                                1e-3 in magnitude */
} mb_synth_config;

typedef struct {
    int type;         /**< mb_synth_defect_type */
    double size_mm;   /**< see mb_synth_defect_type */
    double extent_mm; /**< length along the edge (local defects), else 0 */
    int outline;      /**< outline index in the truth, -1 when not on one */
    double arc;       /**< position along that outline from its first point,
                           as a fraction of its length (0..1); -1 if none */
    double angle;     /**< direction from the part origin to the defect,
                           radians, atan2(dy, dx) in image axes */
    double x, y;      /**< image px: the point on the good edge where the
                           defect sits (part origin when not local) */
} mb_synth_defect;

typedef struct {
    /* which frame */
    mb_synth_family family;
    const char *part_number; /**< static string, e.g. "RG-4030" */
    uint64_t seed;
    uint64_t index;    /**< part index */
    int shot;          /**< how many times this part was imaged before */
    int width, height; /**< px */
    double mm_per_px;
    mb_synth_lighting lighting;
    double noise_sigma, blur_sigma;    /**< as rendered */
    double grey_part, grey_background; /**< nominal grey levels at the frame
                                            centre, before noise */
    /* the part */
    int present;  /**< 0 for an empty frame */
    int in_view;  /**< 1 when every outline point is inside the frame with a
                       margin of at least 3 blur sigma + 2 px */
    int good;     /**< 1 for a good part fully in view */
    mb_pose pose; /**< part frame (mm) -> image px: tx, ty = where the part
                       origin lies, angle, scale = 1 / mm_per_px */
    double size;  /**< size factor of this part (1 = nominal) */
    mb_synth_defect defect;
    /** The rendered outlines in image px, outer edge first, then the holes
        in the family's fixed order (ring: the bore; flange: the opening,
        then the bolt holes clockwise on screen from the top right). Each is
        the exact closed polygon rendered (vertices about 1 px apart, denser
        at defects); the outer edge has positive mb_polygon_area, holes
        negative. n_outlines is 0 for an empty frame. xy is owned by the
        generator and valid until its next call. */
    mb_polyline_set outlines;
} mb_synth_truth;

typedef struct mb_synth mb_synth;

/** Defaults for a family (see the field comments). */
void mb_synth_config_default(mb_synth_config *cfg, mb_synth_family family);

/**
 * Make a generator: checks the configuration, sizes every buffer, draws the
 * station's illumination and belt texture from the seed.
 * Return value: 0; MB_EINVAL (a field out of range: the sentence names it);
 * MB_ERANGE (the part does not fit the frame at this scale, or its outlines
 * would need more points than MB_MAX_OUTLINE_POINTS); MB_ENOMEM.
 */
int mb_synth_open(const mb_synth_config *cfg, mb_synth **out, char *err);

/** Free a generator. NULL-safe. */
void mb_synth_close(mb_synth *g);

/**
 * Make part `index`, imaged for the shot-th time (0 first), with the given
 * defect type, or MB_SYNTH_DRAW to draw it from defect_rate and defect_mask.
 * frame: an image of the configured size (e.g. from mb_image_alloc); truth
 * may be NULL. Allocates nothing.
 * Return value: 0; MB_EINVAL (bad argument or defect type); MB_ESIZE (frame
 * of another size); MB_ERANGE (this part could not be placed in the frame).
 */
int mb_synth_make(mb_synth *g, uint64_t index, int shot, int defect,
                  mb_image *frame, mb_synth_truth *truth);

/**
 * The same part, defect and noise as mb_synth_make, but placed at `pose`
 * (tx, ty: image px of the part origin; angle, radians; scale is ignored)
 * instead of the drawn placement: for a part travelling through the field
 * (capture/synth_source.h). The part may reach out of the frame or lie
 * wholly outside it (truth in_view tells). Allocates nothing.
 * Return value: as mb_synth_make; MB_EINVAL also for CUT (a pose is given)
 * and a non-finite pose.
 */
int mb_synth_make_at(mb_synth *g, uint64_t index, int shot, int defect,
                     const mb_pose *pose, mb_image *frame,
                     mb_synth_truth *truth);

/**
 * mb_synth_make_at drawn over a frame that already holds the empty frame
 * `under` (mb_synth_make(g, under, 0, MB_SYNTH_EMPTY, ...)): only the
 * window around the part (its blur included) is composed, on the same belt
 * texture and lighting, with noise drawn afresh from (index, shot); the
 * rest of the frame is left as it is. Inside the window the pixels are
 * those of mb_synth_make_at but for the noise draw and the belt texture
 * offset (front lighting); the cost is that of the window, not of the
 * frame. Truth as mb_synth_make_at.
 */
int mb_synth_make_over(mb_synth *g, uint64_t index, int shot, int defect,
                       const mb_pose *pose, uint64_t under, mb_image *frame,
                       mb_synth_truth *truth);

/** The most outline points a truth of g can hold (its outlines.xy holds
    twice as many doubles); 0 for NULL. */
int mb_synth_max_points(const mb_synth *g);

/** The next part of the line: mb_synth_make(g, i++, 0, MB_SYNTH_DRAW, ...),
    starting at index 0. */
int mb_synth_next(mb_synth *g, mb_image *frame, mb_synth_truth *truth);

/** The configuration the generator runs with. */
const mb_synth_config *mb_synth_get_config(const mb_synth *g);

/* Names used on the command line and in label files. */
const char *mb_synth_family_name(int family); /**< "ring", ...; "?" */
const char *mb_synth_part_number(int family); /**< "RG-4030", ...; "?" */
const char *mb_synth_defect_name(int type);   /**< "none", "nick", ...; "?" */
const char *mb_synth_lighting_name(int lighting); /**< "back", "front"; "?" */
/** The family / defect type / lighting of a name, or MB_EINVAL. */
int mb_synth_family_from_name(const char *name);
int mb_synth_defect_from_name(const char *name);
int mb_synth_lighting_from_name(const char *name);

#endif
