/*
 * io/teach_report.h - the teach report: one self-contained HTML file (no
 * scripts, no external resources) with inline SVG pictures of what was
 * learned: the mean shape, each of the first modes at -3, 0 and +3 standard
 * deviations, the variance explained per mode, and the T^2 of every training
 * part against its limit.
 */
#ifndef MB_TEACH_REPORT_H
#define MB_TEACH_REPORT_H

#include "part_limits.h"
#include "shape_model.h"

typedef struct {
    const char *name;   /**< file name of the part */
    double t2;          /**< leave-one-out T^2 */
    int outlier;        /**< 1: left out of the model as an outlier */
    const char *note;   /**< short text (failed checks), may be NULL */
} mb_report_part;

typedef struct {
    const char *name;   /**< file name */
    const char *reason; /**< why it was not used */
} mb_report_skip;

typedef struct {
    const char *title;            /**< e.g. the part's name */
    const char *generated;        /**< date/time text */
    const mb_shape_model *model;
    const mb_limits *limits;      /**< may be NULL (teach from points) */
    double mm_per_px;             /**< 0 when unknown */
    double size_px;               /**< mean RMS radius of the parts, px (scale
                                       of the pictures); 0 = unknown */
    const mb_report_part *parts;  /**< used and outlier parts */
    int n_parts;
    const mb_report_skip *skipped;
    int n_skipped;
    const char *const *summary;   /**< lines of the plain summary */
    int n_summary;
} mb_teach_report;

/**
 * Write the report to path (via path.tmp + rename).
 * Return value: 0; MB_EINVAL; MB_EIO; MB_ENOMEM. err names the file.
 */
int mb_teach_report_write(const char *path, const mb_teach_report *r,
                          char *err);

#endif
