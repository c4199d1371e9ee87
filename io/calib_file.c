/*
 * io/calib_file.c - the calibration document (layout in calib_file.h).
 * Values are written as raw items by mb_json_format_double so that they
 * read back bit for bit.
 */
#include "calib_file.h"

#include "error.h"
#include "file_util.h"
#include "json_util.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A calibration document is small; anything above this is not one. */
#define CALIB_MAX_BYTES ((size_t)1 << 20)

/* ---- writing ---- */

static int check_finite(const mb_calib *c, char *err)
{
    const double v[] = {c->pitch, c->rms_px, c->worst_px, c->coverage};
    const char *names[] = {"target.pitch_mm", "residuals.rms_px",
                           "residuals.worst_px", "residuals.coverage"};
    for (int i = 0; i < 4; i++)
        if (!isfinite(v[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration to save: %s is not finite",
                              names[i]);
    for (int f = 0; f < c->n_frames; f++)
        if (!isfinite(c->frame_rms_px[f]) || !isfinite(c->frame_angle_deg[f]) ||
            !isfinite(c->frame_shift_mm[f][0]) ||
            !isfinite(c->frame_shift_mm[f][1]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration to save: frame %d's residual or "
                              "pose is not finite",
                              f + 1);
    return MB_OK;
}

int mb_calib_file_print(const mb_calib *cal, char **text, size_t *len,
                        char *err)
{
    if (!cal || !text || !len)
        return mb_err_set(err, MB_EINVAL, "calibration to save: none given");
    *text = NULL;
    *len = 0;
    int rc;
    if ((rc = mb_calib_validate(cal, err)) < 0)
        return rc;
    if (cal->n_frames < 1 || cal->n_frames > MB_CALIB_MAX_FRAMES)
        return mb_err_set(err, MB_ERANGE,
                          "calibration to save: %d frames, expected 1 to %d",
                          cal->n_frames, MB_CALIB_MAX_FRAMES);
    if ((rc = check_finite(cal, err)) < 0)
        return rc;
    if (memchr(cal->created, '\0', sizeof cal->created) == NULL)
        return mb_err_set(err, MB_EINVAL,
                          "calibration to save: created date not terminated");
    int ok = 1;
    cJSON *root = cJSON_CreateObject();
    if (!root)
        return mb_err_set(err, MB_ENOMEM, "calibration to save: out of memory");
    mb_json_add(root, "format", cJSON_CreateString(MB_CALIB_FORMAT), &ok);
    mb_json_add(root, "version", cJSON_CreateNumber(MB_CALIB_VERSION), &ok);
    mb_json_add(root, "created", cJSON_CreateString(cal->created), &ok);
    cJSON *fr = cJSON_CreateObject();
    mb_json_add(root, "frame", fr, &ok);
    if (fr) {
        mb_json_add(fr, "width", cJSON_CreateNumber(cal->width), &ok);
        mb_json_add(fr, "height", cJSON_CreateNumber(cal->height), &ok);
    }
    cJSON *tg = cJSON_CreateObject();
    mb_json_add(root, "target", tg, &ok);
    if (tg) {
        mb_json_add(tg, "rows", cJSON_CreateNumber(cal->rows), &ok);
        mb_json_add(tg, "cols", cJSON_CreateNumber(cal->cols), &ok);
        mb_json_add(tg, "pitch_mm", mb_json_raw_number(cal->pitch), &ok);
    }
    cJSON *mo = cJSON_CreateObject();
    mb_json_add(root, "model", mo, &ok);
    if (mo) {
        cJSON *rows = cJSON_CreateArray();
        mb_json_add(mo, "plane_to_image", rows, &ok);
        for (int r = 0; r < 3 && rows; r++) {
            double row[3] = {cal->h[r], cal->h[r + 3], cal->h[r + 6]};
            mb_json_push(rows, mb_json_raw_array(row, 3, &ok), &ok);
        }
        cJSON *d = cJSON_CreateObject();
        mb_json_add(mo, "distortion", d, &ok);
        if (d) {
            double c[2] = {cal->cx, cal->cy};
            mb_json_add(d, "centre_px", mb_json_raw_array(c, 2, &ok), &ok);
            mb_json_add(d, "radius_px", mb_json_raw_number(cal->radius), &ok);
            mb_json_add(d, "k1", mb_json_raw_number(cal->k1), &ok);
            mb_json_add(d, "k2", mb_json_raw_number(cal->k2), &ok);
            mb_json_add(d, "p1", mb_json_raw_number(cal->p1), &ok);
            mb_json_add(d, "p2", mb_json_raw_number(cal->p2), &ok);
        }
    }
    cJSON *re = cJSON_CreateObject();
    mb_json_add(root, "residuals", re, &ok);
    if (re) {
        mb_json_add(re, "frames", cJSON_CreateNumber(cal->n_frames), &ok);
        mb_json_add(re, "points_per_frame", cJSON_CreateNumber(cal->n_points),
                    &ok);
        mb_json_add(re, "rms_px", mb_json_raw_number(cal->rms_px), &ok);
        mb_json_add(re, "worst_px", mb_json_raw_number(cal->worst_px), &ok);
        mb_json_add(re, "worst_frame", cJSON_CreateNumber(cal->worst_frame),
                    &ok);
        mb_json_add(re, "worst_point", cJSON_CreateNumber(cal->worst_point),
                    &ok);
        mb_json_add(re, "coverage", mb_json_raw_number(cal->coverage), &ok);
        mb_json_add(re, "iterations", cJSON_CreateNumber(cal->iterations), &ok);
        mb_json_add(re, "frame_rms_px",
                    mb_json_raw_array(cal->frame_rms_px, cal->n_frames, &ok),
                    &ok);
    }
    cJSON *po = cJSON_CreateArray();
    mb_json_add(root, "poses", po, &ok);
    for (int f = 0; f < cal->n_frames && po; f++) {
        cJSON *p = cJSON_CreateObject();
        mb_json_push(po, p, &ok);
        if (p) {
            mb_json_add(p, "angle_deg",
                        mb_json_raw_number(cal->frame_angle_deg[f]), &ok);
            mb_json_add(p, "shift_mm",
                        mb_json_raw_array(cal->frame_shift_mm[f], 2, &ok), &ok);
        }
    }
    char *s = ok ? cJSON_Print(root) : NULL;
    cJSON_Delete(root);
    if (!s)
        return mb_err_set(err, MB_ENOMEM, "calibration to save: out of memory");
    size_t n = strlen(s);
    char *buf = malloc(n + 2);
    if (!buf) {
        cJSON_free(s);
        return mb_err_set(err, MB_ENOMEM, "calibration to save: out of memory");
    }
    memcpy(buf, s, n);
    buf[n] = '\n';
    buf[n + 1] = '\0';
    cJSON_free(s);
    *text = buf;
    *len = n + 1;
    return MB_OK;
}

int mb_calib_file_save(const char *path, const mb_calib *cal, char *err)
{
    char *text = NULL;
    size_t len = 0;
    if (!path)
        return mb_err_set(err, MB_EINVAL, "calibration: no file name");
    int rc = mb_calib_file_print(cal, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_file_write_atomic(path, text, len, err);
    free(text);
    return rc;
}

/* ---- reading ---- */

static int read_number(const cJSON *obj, const char *name, const char *at,
                       const char *key, double *out, char *err)
{
    return mb_json_member_number(obj, name, at, key, out, err);
}

static int read_model(const cJSON *root, const char *name, mb_calib *c,
                      char *err)
{
    const cJSON *mo, *rows, *d, *it;
    char field[MB_JSON_FIELD_LEN];
    int rc;
    if ((rc = mb_json_member(root, name, "", "model", MB_JSON_OBJECT, &mo,
                             err)) < 0 ||
        (rc = mb_json_member(mo, name, "model", "plane_to_image", MB_JSON_ARRAY,
                             &rows, err)) < 0)
        return rc;
    if (cJSON_GetArraySize(rows) != 3)
        return mb_err_set(err, MB_ESIZE,
                          "%s: model.plane_to_image: expected 3 rows, found %d",
                          name, cJSON_GetArraySize(rows));
    int r = 0;
    cJSON_ArrayForEach(it, rows)
    {
        double row[3];
        snprintf(field, sizeof field, "model.plane_to_image[%d]", r);
        if ((rc = mb_json_numbers(it, name, field, 3, row, err)) < 0)
            return rc;
        for (int k = 0; k < 3; k++)
            c->h[r + 3 * k] = row[k];
        r++;
    }
    if (c->h[8] != 1.0)
        return mb_err_set(err, MB_ERANGE,
                          "%s: model.plane_to_image[2][2]: expected 1, found "
                          "%.17g",
                          name, c->h[8]);
    const char *at = "model.distortion";
    const cJSON *cen;
    double cc[2];
    if ((rc = mb_json_member(mo, name, "model", "distortion", MB_JSON_OBJECT,
                             &d, err)) < 0 ||
        (rc = mb_json_member(d, name, at, "centre_px", MB_JSON_ARRAY, &cen,
                             err)) < 0 ||
        (rc = mb_json_numbers(cen, name, "model.distortion.centre_px", 2, cc,
                              err)) < 0 ||
        (rc = read_number(d, name, at, "radius_px", &c->radius, err)) < 0 ||
        (rc = read_number(d, name, at, "k1", &c->k1, err)) < 0 ||
        (rc = read_number(d, name, at, "k2", &c->k2, err)) < 0 ||
        (rc = read_number(d, name, at, "p1", &c->p1, err)) < 0 ||
        (rc = read_number(d, name, at, "p2", &c->p2, err)) < 0)
        return rc;
    c->cx = cc[0];
    c->cy = cc[1];
    if (!(c->radius > 0.0))
        return mb_err_set(err, MB_ERANGE,
                          "%s: model.distortion.radius_px: expected a "
                          "positive number, found %.17g",
                          name, c->radius);
    return MB_OK;
}

static int read_residuals(const cJSON *root, const char *name, mb_calib *c,
                          char *err)
{
    const cJSON *re, *a, *po, *it;
    const char *at = "residuals";
    char field[MB_JSON_FIELD_LEN];
    int rc;
    if ((rc = mb_json_member(root, name, "", "residuals", MB_JSON_OBJECT, &re,
                             err)) < 0 ||
        (rc = mb_json_member_int(re, name, at, "frames", 1, MB_CALIB_MAX_FRAMES,
                                 &c->n_frames, err)) < 0 ||
        (rc = mb_json_member_int(re, name, at, "points_per_frame", 8,
                                 MB_CALIB_MAX_OBS, &c->n_points, err)) < 0 ||
        (rc = read_number(re, name, at, "rms_px", &c->rms_px, err)) < 0 ||
        (rc = read_number(re, name, at, "worst_px", &c->worst_px, err)) < 0 ||
        (rc = mb_json_member_int(re, name, at, "worst_frame", 0,
                                 c->n_frames - 1, &c->worst_frame, err)) < 0 ||
        (rc = mb_json_member_int(re, name, at, "worst_point", 0,
                                 c->n_points - 1, &c->worst_point, err)) < 0 ||
        (rc = read_number(re, name, at, "coverage", &c->coverage, err)) < 0 ||
        (rc = mb_json_member_int(re, name, at, "iterations", 0, 1 << 30,
                                 &c->iterations, err)) < 0 ||
        (rc = mb_json_member(re, name, at, "frame_rms_px", MB_JSON_ARRAY, &a,
                             err)) < 0 ||
        (rc = mb_json_numbers(a, name, "residuals.frame_rms_px", c->n_frames,
                              c->frame_rms_px, err)) < 0)
        return rc;
    if (!(c->rms_px >= 0.0) || !(c->worst_px >= 0.0))
        return mb_err_set(err, MB_ERANGE,
                          "%s: residuals: expected rms_px and worst_px not "
                          "negative",
                          name);
    if (!(c->coverage >= 0.0 && c->coverage <= 1.0))
        return mb_err_set(err, MB_ERANGE,
                          "%s: residuals.coverage: expected 0 to 1, found "
                          "%.17g",
                          name, c->coverage);
    if ((rc = mb_json_member(root, name, "", "poses", MB_JSON_ARRAY, &po,
                             err)) < 0)
        return rc;
    if (cJSON_GetArraySize(po) != c->n_frames)
        return mb_err_set(err, MB_ESIZE,
                          "%s: poses: expected %d poses (one per frame), "
                          "found %d",
                          name, c->n_frames, cJSON_GetArraySize(po));
    int f = 0;
    cJSON_ArrayForEach(it, po)
    {
        const cJSON *sh;
        snprintf(field, sizeof field, "poses[%d]", f);
        if (!cJSON_IsObject(it))
            return mb_json_expected(err, MB_EFORMAT, name, field, it,
                                    "an object");
        char sf[MB_JSON_FIELD_LEN + 16];
        snprintf(sf, sizeof sf, "%s.shift_mm", field);
        if ((rc = read_number(it, name, field, "angle_deg",
                              &c->frame_angle_deg[f], err)) < 0 ||
            (rc = mb_json_member(it, name, field, "shift_mm", MB_JSON_ARRAY,
                                 &sh, err)) < 0 ||
            (rc = mb_json_numbers(sh, name, sf, 2, c->frame_shift_mm[f], err)) <
                0)
            return rc;
        f++;
    }
    return MB_OK;
}

static int parse_root(const cJSON *root, const char *name, mb_calib *c,
                      char *err)
{
    const cJSON *cr, *fr, *tg;
    int rc;
    if ((rc = mb_json_check_header(root, name, MB_CALIB_FORMAT,
                                   MB_CALIB_VERSION, err)) < 0 ||
        (rc = mb_json_member(root, name, "", "created", MB_JSON_STRING, &cr,
                             err)) < 0)
        return rc;
    if (strlen(cr->valuestring) >= sizeof c->created)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: created: expected at most %zu characters, "
                          "found %zu",
                          name, sizeof c->created - 1, strlen(cr->valuestring));
    strcpy(c->created, cr->valuestring);
    if ((rc = mb_json_member(root, name, "", "frame", MB_JSON_OBJECT, &fr,
                             err)) < 0 ||
        (rc = mb_json_member_int(fr, name, "frame", "width", 2, 16384,
                                 &c->width, err)) < 0 ||
        (rc = mb_json_member_int(fr, name, "frame", "height", 2, 16384,
                                 &c->height, err)) < 0 ||
        (rc = mb_json_member(root, name, "", "target", MB_JSON_OBJECT, &tg,
                             err)) < 0 ||
        (rc = mb_json_member_int(tg, name, "target", "rows", 0, 1 << 16,
                                 &c->rows, err)) < 0 ||
        (rc = mb_json_member_int(tg, name, "target", "cols", 0, 1 << 16,
                                 &c->cols, err)) < 0 ||
        (rc = read_number(tg, name, "target", "pitch_mm", &c->pitch, err)) < 0)
        return rc;
    if (!(c->pitch >= 0.0))
        return mb_err_set(err, MB_ERANGE,
                          "%s: target.pitch_mm: expected a number >= 0, "
                          "found %.17g",
                          name, c->pitch);
    if ((rc = read_model(root, name, c, err)) < 0 ||
        (rc = read_residuals(root, name, c, err)) < 0)
        return rc;
    char why[MB_ERR_LEN];
    if ((rc = mb_calib_validate(c, why)) < 0) {
        const char *w = strncmp(why, "calibration: ", 13) ? why : why + 13;
        return mb_err_set(err, rc, "%s: model: %s", name, w);
    }
    return MB_OK;
}

int mb_calib_file_parse(const char *text, size_t len, const char *name,
                        mb_calib *cal, char *err)
{
    if (!text || !cal)
        return mb_err_set(err, MB_EINVAL, "calibration: nothing to read");
    if (!name)
        name = "calibration";
    memset(cal, 0, sizeof *cal);
    cJSON *root = NULL;
    int rc = mb_json_parse(text, len, name, &root, err);
    if (rc < 0)
        return rc;
    rc = parse_root(root, name, cal, err);
    cJSON_Delete(root);
    if (rc < 0)
        memset(cal, 0, sizeof *cal);
    return rc;
}

int mb_calib_file_load(const char *path, mb_calib *cal, char *err)
{
    char *text = NULL;
    size_t len = 0;
    if (!path || !cal)
        return mb_err_set(err, MB_EINVAL, "calibration: no file name");
    memset(cal, 0, sizeof *cal);
    int rc = mb_file_read_all(path, CALIB_MAX_BYTES, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_calib_file_parse(text, len, path, cal, err);
    free(text);
    return rc;
}

int mb_calib_file_load_for(const char *path, int width, int height,
                           mb_calib *cal, char *err)
{
    int rc = mb_calib_file_load(path, cal, err);
    if (rc < 0)
        return rc;
    char why[MB_ERR_LEN];
    if ((rc = mb_calib_check_frame(cal, width, height, why)) < 0) {
        const char *w = strncmp(why, "calibration: ", 13) ? why : why + 13;
        memset(cal, 0, sizeof *cal);
        return mb_err_set(err, rc, "%s: %s", path, w);
    }
    return MB_OK;
}
