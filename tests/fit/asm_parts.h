/*
 * tests/fit/asm_parts.h - analytic test parts for the profile, locate and
 * search tests and the search benchmark: each part is given both as exact
 * landmarks (evenly spaced by arc length on every outline, one common
 * layout per family, so correspondence is exact by construction) and as a
 * scene rendered by tests/fit/outline_scene.h (anti-aliased, blurred, noisy),
 * whose analytic outline is the ground truth of every measured point.
 *
 * Families (invented):
 *   ASMP_RING    annulus, outer radius 1.0, inner 0.7 (times size): no
 *                orientation feature;
 *   ASMP_FLANGE  rounded rectangle 1.0 x 0.72 (half sizes) with a stadium
 *                opening and four bolt holes: symmetric under 180 degrees;
 *   ASMP_TAB     rounded rectangle 1.0 x 0.5 with one round hole off
 *                centre: a part with one orientation.
 * Good parts vary: size (+-1.5 % sd), aspect or wall (+-2 % sd), corner
 * radius, hole positions (a fraction of a px).
 *
 * Test code: prints nothing, aborts on allocation failure.
 */
#ifndef MB_TEST_ASM_PARTS_H
#define MB_TEST_ASM_PARTS_H

#include "outline_scene.h"
#include "profile.h"
#include "shape.h"
#include "shape_model.h"

#include <stdint.h>

enum { ASMP_RING = 0, ASMP_FLANGE, ASMP_TAB, ASMP_N_FAMILIES };

typedef struct {
    int family;
    double size;        /* px: outer half length (ring: outer radius) */
    double cx, cy;      /* centre, px */
    double angle;       /* radians, clockwise on screen */
    double var[4];      /* natural variation draws, standard normal units */
} asmp_part;

/** Lighting and sensor for rendering. */
typedef struct {
    double part, back;  /* grey levels */
    double blur, noise, texture, ramp;
} asmp_look;

/** The back-lit look: dark part 60 on bright 200, blur 1, noise 2. */
asmp_look asmp_backlit(void);

/** The common layout of a family (counts scale with `points`, the total
    wanted, >= 48). */
void asmp_layout(int family, int points, mb_layout *layout);

/** A good part of a family at a random place and angle inside a w x h
    frame (margin keeps it in view), size px, variation from rng. */
asmp_part asmp_random(int family, double size, int w, int h, uint64_t *rng);

/** Exact landmarks of part p in image px for layout (2 n values). */
void asmp_landmarks(const asmp_part *p, const mb_layout *layout, double *xy);

/** The scene of part p with look lk and noise seed; extra holes (nicks)
    may be added to sc->hole afterwards. */
void asmp_scene(const asmp_part *p, const asmp_look *lk, uint64_t seed,
                scene *sc);

/** A nick: a circular notch of radius r cut `depth` px deep into the outer
    edge of p at landmark `at` of the exact outline (xy, normals nxy from
    mb_profile_normals), added to sc as a hole. */
void asmp_add_nick(scene *sc, const double *xy, const double *nxy, int at,
                   double depth, double r);

/** A taught part: both models of one family. */
typedef struct {
    mb_layout layout;
    mb_shape_model *sm;
    mb_profile_model *pm;
} asmp_model;

/**
 * Teach a family from m rendered good parts (size px, frames w x h, layout
 * of `points` landmarks, pyramid of `levels` levels): shape model (GPA +
 * PCA, 99.9 % of the variance: the corner radius and hole
 * positions of the flange are small modes) from the exact landmarks, profile model
 * (default parameters with `levels`) from the frames. Returns 0 or the
 * failing call's code.
 */
int asmp_teach(int family, double size, int w, int h, int m, int points,
               int levels, const asmp_look *lk, uint64_t seed,
               asmp_model *out);

/** Free a taught part. */
void asmp_model_free(asmp_model *t);

#endif
