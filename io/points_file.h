/*
 * io/points_file.h - landmark point files: one shape (one part) per file,
 * several outlines per shape.
 *
 * JSON (*.json):
 *   { "format": "modeband-points", "version": 1,
 *     "outlines": [ [[x, y], [x, y], ...],     outer edge first
 *                   [[x, y], ...], ... ] }     then each hole
 * CSV (*.csv): one point per line "outline,x,y" (outline = 0 for the outer
 *   edge, 1.. for holes, non-decreasing); blank lines and lines starting with
 *   '#' are skipped; an optional header line "outline,x,y".
 * Coordinates in pixels (x right, y down) or any consistent unit.
 */
#ifndef MB_POINTS_FILE_H
#define MB_POINTS_FILE_H

#include <stddef.h>

#include "shape.h"

/**
 * Read one point file (by extension: .json or .csv). On success *xy is a
 * malloc'd array of 2 * layout->n_points doubles (interleaved) the caller
 * frees, and layout describes its outlines.
 * Return value: 0; MB_EIO/MB_ENOTFOUND; MB_EFORMAT (syntax, field, too few
 * points in an outline, too many outlines, a name not ending in .json or
 * .csv); MB_EVERSION (JSON: another "format" or an unknown "version");
 * MB_ENUMERIC (NaN/inf, or null where a number belongs); MB_ENOMEM. err
 * names the file, the line or field, and what was expected. On failure
 * *xy is NULL.
 */
int mb_points_load(const char *path, mb_layout *layout, double **xy, char *err);

/** The same from a buffer; is_csv selects the syntax; name for errors. */
int mb_points_parse(const char *text, size_t len, int is_csv, const char *name,
                    mb_layout *layout, double **xy, char *err);

/** Write a JSON point file (path.tmp, fsync, rename), coordinates exact.
    Return value: 0, MB_EINVAL (bad layout, non-finite coordinate), MB_EIO,
    MB_ENOMEM. */
int mb_points_save(const char *path, const mb_layout *layout, const double *xy,
                   char *err);

#endif
