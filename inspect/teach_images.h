/*
 * inspect/teach_images.h - teaching a part from images of good parts:
 * outlines found automatically, put into correspondence, aligned, modelled;
 * profile models and tolerance bands learned; outliers screened out.
 * The policy is here; every computation is in fit/.
 */
#ifndef MB_TEACH_IMAGES_H
#define MB_TEACH_IMAGES_H

#include <stdio.h>

#include "bands.h"
#include "camera.h"
#include "part_model.h"

/** Fewest usable images teaching accepts. */
#define MB_TEACH_MIN_IMAGES 10
/** Below this many usable images teaching warns. */
#define MB_TEACH_GOOD_IMAGES 20

typedef struct {
    double variance;     /**< fraction of shape variance to keep; 0.98 */
    int modes;           /**< > 0: keep exactly this many instead */
    int points;          /**< landmark budget over all outlines; 256 */
    double mm_per_px;    /**< 0 = unknown */
    /** NULL: none. Given (for the images' frame size, else teaching
        fails with MB_ESIZE): gauges are measured through it on the plane
        in mm, and the model keeps its local scale at the frame centre as
        mm_per_px (mm_per_px above must then be 0). */
    const mb_calib *calib;
    int keep_outliers;   /**< 1: keep training parts screened as outliers */
    mb_bands_params bands;
    const char *name;    /**< part name stored in the model; may be NULL */
    int n_gauges;        /**< drawing gauges to store (need mm_per_px) */
    const mb_gauge_def *gauges;
    FILE *progress;      /**< progress bar target (a terminal) or NULL */
} mb_teach_params;

/** One image that was not used, and why. */
typedef struct {
    char *path;
    char reason[256];
} mb_teach_skip;

/** What teaching did, for the summary and the report. */
typedef struct {
    int n_images;         /**< image files found */
    int n_used;           /**< parts the model was built from */
    char **used;          /**< their paths (n_used) */
    mb_teach_skip *skips; /**< images not used (n_skipped) */
    int n_skipped;
    int n_outliers;       /**< of those, left out as outliers */
    int modes_capped;     /**< 1: k was capped by the number of parts */
    mb_bands_scores scores; /**< leave-one-out scores of the used parts */
    double seconds[8];    /**< per stage: [0] load+outline, [1] correspond, [2] model,
                               [3] bands, [4] profiles, [5] total, [6] second
                               pass (measured as inspection measures) */
    double blur, contrast;/**< median edge blur (px) and contrast (grey) */
} mb_teach_log;

void mb_teach_params_default(mb_teach_params *p);

/**
 * Teach from the images (PGM/PNG) in dir. On success *pm holds the model
 * (free with mb_part_model_free) and log what was done (free with
 * mb_teach_log_free, also after a failure).
 * Return value: 0; MB_ENOTFOUND (no folder); MB_EDEGENERATE (fewer than
 * MB_TEACH_MIN_IMAGES usable images, the sentence says how many and why the
 * others were skipped); other codes from the stages. err gets a sentence.
 */
int mb_teach_images(const char *dir, const mb_teach_params *p,
                    mb_part_model *pm, mb_teach_log *log, char *err);

void mb_teach_log_free(mb_teach_log *log);

#endif
