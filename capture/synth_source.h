/*
 * capture/synth_source.h - the synthetic production line (capture/synth.h)
 * as a live frame source: parts travel across the field on a conveyor.
 *
 * The belt runs in +x (left to right) at speed_px per frame. Parts lie on
 * it pitch_px apart, part j's origin at
 *     x_j(k) = -R + speed_px * k - pitch_px * j        (frame k)
 * where R is the radius of the circle holding a part (with room for its
 * variation and the blur), so part 0 enters from the left edge at frame 0.
 * Each part keeps its own lateral position y_j and rotation, drawn from the
 * seed and j; its shape and defect are those of mb_synth_make's part index
 * j (defects drawn with the generator's defect_rate and defect_mask; CUT is
 * never drawn: parts entering and leaving are cut by the frame edge by
 * themselves, and truth.in_view says when a part is wholly in view). The
 * default pitch leaves exactly one part or none in view: free-running
 * inspection has to find each part as it enters and count it once.
 *
 * Frames are numbered k = 0, 1, ... and each is a pure function of the
 * configuration and k: two sources with the same configuration give the
 * same frames. With fps > 0 frame k is due k / fps after the first call of
mb_source_next and is
 * not handed out before (mb_source_next times out if it is not due within
 * the timeout); a caller that falls behind gets every frame in turn, or,
 * with drop_late, the latest due frame, the skipped ones counted as
 * dropped. With fps = 0 frames come as fast as they are asked for.
 *
 * Rendering a frame costs what mb_synth_make costs (a few ms at 1280 x
 * 1024); nothing is allocated per frame.
 */
#ifndef MB_SYNTH_SOURCE_H
#define MB_SYNTH_SOURCE_H

#include <stdint.h>

#include "source.h"
#include "synth.h"

typedef struct {
    mb_synth_config synth; /**< the generator: family, frame size, scale,
                                lighting, noise, defect rate, seed */
    double speed_px;       /**< belt travel per frame, px (> 0); default 60 */
    double pitch_px;       /**< distance between parts on the belt, px;
                                0 (default): frame width + 2 R, one part in
                                view at a time; less is refused (two parts
                                would be in view) */
    double fps;    /**< frames per second; 0 (default) = as fast as asked */
    int drop_late; /**< with fps > 0: skip to the latest due frame when the
                        caller falls behind; default 0 */
    uint64_t max_frames; /**< after this many frames mb_source_next returns
                              MB_ENOTFOUND; 0 (default) = endless */
    int render_ahead; /**< 1: a thread of the source draws the next frames
                           while the caller works on the last one, as a
                           camera exposes the next frame on its own (the
                           same frames; ignored with drop_late); default 0:
                           each frame is drawn when asked for */
} mb_synth_source_config;

/** What is in the frame last handed out. */
typedef struct {
    int64_t part;         /**< index j of the belt slot in the field, or -1
                               between slots (a slot may hold no part: a
                               drawn EMPTY defect; truth.present says) */
    uint64_t frame;       /**< frame number k (equals mb_frame.seq) */
    mb_synth_truth truth; /**< the generator's ground truth for that frame
                               (outlines valid until the next frame);
                               truth.present is 0 between parts and for a
                               drawn EMPTY slot */
} mb_synth_source_truth;

/** Defaults (see the field comments) with mb_synth_config_default(family). */
void mb_synth_source_config_default(mb_synth_source_config *cfg,
                                    mb_synth_family family);

/**
 * Make the generator and the source.
 * Return value: 0; MB_EINVAL (a field out of range: the sentence names
 * it); MB_ERANGE (the part does not fit the frame); MB_ENOMEM.
 */
int mb_synth_source_open(const mb_synth_source_config *cfg, mb_source **out,
                         char *err);

/**
 * The ground truth of the frame last handed out by a synthetic source;
 * NULL for another kind of source or before the first frame. Valid until
 * the next call on the source.
 */
const mb_synth_source_truth *mb_synth_source_truth_of(const mb_source *src);

/** R of the header comment, px: half the span of a part on the belt. */
double mb_synth_source_radius(const mb_source *src);

/** The distance between parts on the belt, px (pitch_px, or its default). */
double mb_synth_source_pitch(const mb_source *src);

#endif
