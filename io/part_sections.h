/*
 * io/part_sections.h - the members of the model file's payload beyond the
 * shape model: "part" (name), "imaging" (frame size, scale, polarity),
 * "limits" (acceptance limits) and "profiles" (grey-level profile models).
 * Used by model_file.c; separate so each section's reader names its fields.
 *
 *   "part":     {"name": TEXT}
 *   "imaging":  {"width", "height", "mm_per_px", "dark_part"}
 *   "limits":   {"alpha", "n_train", "n_modes", "n_judged",
 *                "mode_band": [n_judged], "t2_limit", "t2_phase2",
 *                "t2_inflation", "spe_limit", "spe_jm", "size_mean",
 *                "size_lo", "size_hi", "size_sd", "local_sigma": [n],
 *                "local_limit": [n], "loo_rejects", "frr_loo", "frr_upper"}
 *   "profiles": {"levels", "half_len", "shrink", "floor", "samples",
 *                "part_grey", "back_grey", "area", "size",
 *                "means": [levels * n * p]      level-major, then landmark
 *                "cov_upper": [levels * n * p (p + 1) / 2]}
 *   "gauges":   [{"name", "kind" ("diameter", "width-min", "width-max",
 *                 "spacing", "length", "area"), "outline", "outline_b"
 *                 (spacing only), "nominal_mm", "tol_lo_mm", "tol_hi_mm",
 *                 "taught_mean_mm", "taught_sd_mm"}]
 *                            each covariance's upper triangle, column by
 *                            column (S'[0][0], S'[0][1], S'[1][1], ...)
 * with n landmarks and p = 2 half_len + 1. Every section is optional in the
 * file; a model without "profiles" cannot inspect images.
 */
#ifndef MB_PART_SECTIONS_H
#define MB_PART_SECTIONS_H

#include <cjson/cJSON.h>

#include "part_model.h"

/** Add the sections pm has to payload. 0; MB_ENUMERIC; MB_ENOMEM. */
int mb_part_sections_add(cJSON *payload, const mb_part_model *pm);

/**
 * Read the sections present in payload into pm (pm->shape must already be
 * set: its layout fixes the sizes). name is the file for the sentence.
 * Return value: 0; MB_EFORMAT; MB_ESIZE; MB_ENUMERIC; MB_ENOMEM; and codes
 * of mb_profile_model_create.
 */
int mb_part_sections_read(const cJSON *payload, const char *name,
                          mb_part_model *pm, char *err);

/**
 * Read a "gauges" array (the model's, or a gauge file's) into defs (at most
 * MB_MAX_GAUGES). field names the array in sentences. n_outlines bounds the
 * outline indices (0: not checked). taught_* members are optional.
 * Return value: 0; MB_EFORMAT; MB_ERANGE (too many gauges, an index or a
 * tolerance out of range).
 */
int mb_gauges_read(const cJSON *array, const char *name, const char *field,
                   int n_outlines, mb_gauge_def *defs, int *n, char *err);

/**
 * Read a gauge file: {"format": "modeband-gauges", "version": 1,
 * "gauges": [...]} with items as in the model's "gauges".
 */
int mb_gauges_load(const char *path, mb_gauge_def *defs, int *n, char *err);

#endif
