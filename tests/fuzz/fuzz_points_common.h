/*
 * tests/fuzz/fuzz_points_common.h - the body shared by the JSON and CSV
 * point-file fuzz targets: parse, then check what an accepted file gives.
 */
#ifndef MB_FUZZ_POINTS_COMMON_H
#define MB_FUZZ_POINTS_COMMON_H

#include "error.h"
#include "points_file.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* Parse data; on success the layout must be valid and every coordinate
   finite; on failure nothing is returned and the sentence names the file. */
static inline void fuzz_points(const uint8_t *data, size_t size, int is_csv)
{
    const char *name = is_csv ? "fuzz.csv" : "fuzz.json";
    char err[MB_ERR_LEN] = "";
    mb_layout l;
    double *xy = NULL;
    int rc =
        mb_points_parse((const char *)data, size, is_csv, name, &l, &xy, err);
    if (rc == 0) {
        MB_ASSERT(xy != NULL);
        MB_ASSERT(l.n_outlines >= 1 && l.n_outlines <= MB_MAX_OUTLINES);
        int sum = 0;
        for (int i = 0; i < l.n_outlines; i++) {
            MB_ASSERT(l.counts[i] >= 3 && l.counts[i] <= MB_MAX_OUTLINE_POINTS);
            sum += l.counts[i];
        }
        MB_ASSERT(sum == l.n_points);
        for (int i = 0; i < 2 * l.n_points; i++)
            MB_ASSERT(isfinite(xy[i]));
    } else {
        MB_ASSERT(xy == NULL && rc < 0 && rc >= MB_ECODE_MIN);
        MB_ASSERT(strncmp(err, name, strlen(name)) == 0);
    }
    free(xy);
}

#endif
