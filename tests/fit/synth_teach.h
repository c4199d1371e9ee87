/*
 * tests/fit/synth_teach.h - teach a part from frames of the synthetic
 * production line (capture/synth.h) with the fit/ path alone: outlines
 * (fit/outline.h) -> correspondence (fit/correspond.h) -> shape model
 * (GPA + PCA) and profile model (fit/profile.h). For the search tests and
 * the search benchmark; the real teaching policy lives in inspect/.
 *
 * Test code: returns the failing call's code with a sentence in err.
 */
#ifndef MB_TEST_SYNTH_TEACH_H
#define MB_TEST_SYNTH_TEACH_H

#include "error.h"
#include "image.h"
#include "polyline.h"
#include "profile.h"
#include "pyramid.h"
#include "shape_model.h"
#include "synth.h"

typedef struct {
    mb_synth *gen;         /**< the generator (good parts 0 .. frames-1
                                were the teaching set) */
    mb_image img;          /**< a frame buffer of the generator's size */
    mb_pyramid *pyr;       /**< levels as asked */
    mb_shape_model *sm;
    mb_profile_model *pm;
    int n_used;            /**< teaching frames the correspondence used */
} synth_taught;

/**
 * Open a generator with cfg, teach from good parts 0 .. frames-1 with
 * `points` landmarks, `variance` of the shape variance kept and a pyramid
 * of `levels` levels.
 */
int synth_teach(const mb_synth_config *cfg, int frames, int points,
                double variance, int levels, synth_taught *t, char *err);

/** Free everything of t. */
void synth_forget(synth_taught *t);

/** Distance from (x, y) to the nearest segment of a set of closed
    outlines (the generator's truth). */
double synth_truth_distance(const mb_polyline_set *s, double x, double y);

#endif
