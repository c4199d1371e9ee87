/*
 * tests/fit/outline_scene.h - a small renderer of analytic parts for the
 * outline and pyramid tests and the outline benchmark.
 *
 * A scene is a union of filled shapes (circles and rotated rounded
 * rectangles) minus a union of hole shapes, drawn in `part` grey on a
 * `back` grey field. Rendering is anti-aliased by supersampling (16 x 16
 * samples in every pixel that the outline may cross, exact coverage 0 or 1
 * elsewhere), then blurred with a sampled Gaussian (optical blur), then
 * optionally given a belt texture on the background, a linear illumination
 * ramp, and Gaussian sensor noise from a fixed-seed generator, and rounded to
 * 8 bits. Pixel centres are at integer coordinates (as in fit/image.h), so
 * the analytic outline is the ground truth for every measured point.
 *
 * Test code: prints nothing, aborts on allocation failure.
 */
#ifndef MB_TEST_OUTLINE_SCENE_H
#define MB_TEST_OUTLINE_SCENE_H

#include "image.h"

#include <stdint.h>

enum { SCENE_CIRCLE = 1, SCENE_RRECT = 2 };

typedef struct {
    int type;      /* SCENE_CIRCLE or SCENE_RRECT */
    double cx, cy; /* centre, px */
    double a, b;   /* circle: a = radius; rrect: half width, half height */
    double r;      /* rrect corner radius (0 .. min(a, b)) */
    double angle;  /* rrect rotation, radians, clockwise on screen */
} scene_shape;

#define SCENE_MAX_SHAPES 80

typedef struct {
    scene_shape solid[SCENE_MAX_SHAPES]; /* filled shapes, united */
    int n_solid;
    scene_shape hole[SCENE_MAX_SHAPES]; /* holes, cut out of the union */
    int n_hole;
    double part, back; /* grey levels of part and field */
    double blur;       /* Gaussian blur sigma, px (0: none) */
    double noise;      /* sensor noise sigma, grey levels (0: none) */
    double texture;    /* belt texture amplitude on the field, grey levels */
    double ramp;   /* illumination gain change across the width (0.1 = 10 %) */
    uint64_t seed; /* noise and texture seed */
} scene;

/** Signed distance from (x, y) to one shape's outline: < 0 inside. Exact. */
double scene_shape_distance(const scene_shape *s, double x, double y);

/** Distance from (x, y) to the nearest outline of any shape of the scene. */
double scene_outline_distance(const scene *sc, double x, double y);

/**
 * Render sc into img (allocated by the caller; every pixel is written).
 */
void scene_render(const scene *sc, mb_image *img);

/** A deterministic generator for tests: splitmix64 state, uniform, normal. */
double scene_uniform(uint64_t *state);
double scene_normal(uint64_t *state);

#endif
