/*
 * io/labels_file.c - ground-truth labels as JSON Lines, written and read
 * with cJSON; field checks through io/json_util.h.
 */
#include "labels_file.h"

#include "error.h"
#include "json_util.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define DEG (180.0 / M_PI)

struct mb_labels_writer {
    FILE *f;
    char *path;
};

struct mb_labels_reader {
    FILE *f;
    char *path;
    char *line;
    size_t line_cap;
    int line_no;
    double *xy;
    size_t xy_cap; /* doubles */
};

/* Round to 1e-4 (px) so the file stays compact; the nearest double of a
   4-decimal value prints back as those 4 decimals. */
static double r4(double v)
{
    return round(v * 1e4) / 1e4;
}

/* ---- writer */

int mb_labels_writer_open(const char *path, mb_labels_writer **out, char *err)
{
    if (!path || !out)
        return mb_err_set(err, MB_EINVAL, "labels: no file name given");
    *out = NULL;
    mb_labels_writer *w = calloc(1, sizeof *w);
    if (!w || !(w->path = strdup(path))) {
        free(w);
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    }
    w->f = fopen(path, "w");
    if (!w->f) {
        int e = errno;
        free(w->path);
        free(w);
        return mb_err_set(err, MB_EIO, "%s: cannot create: %s", path,
                          strerror(e));
    }
    *out = w;
    return 0;
}

static cJSON *point_array(double x, double y)
{
    cJSON *a = cJSON_CreateArray();
    if (a) {
        cJSON_AddItemToArray(a, cJSON_CreateNumber(r4(x)));
        cJSON_AddItemToArray(a, cJSON_CreateNumber(r4(y)));
    }
    return a;
}

static cJSON *record(const char *image, const mb_synth_truth *t)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return NULL;
    char seed[32];
    snprintf(seed, sizeof seed, "%" PRIu64, t->seed);
    cJSON_AddStringToObject(o, "format", MB_LABELS_FORMAT);
    cJSON_AddNumberToObject(o, "version", MB_LABELS_VERSION);
    cJSON_AddStringToObject(o, "image", image);
    cJSON_AddStringToObject(o, "family", mb_synth_family_name((int)t->family));
    cJSON_AddStringToObject(o, "part", mb_synth_part_number((int)t->family));
    cJSON_AddStringToObject(o, "seed", seed);
    cJSON_AddNumberToObject(o, "index", (double)t->index);
    cJSON_AddNumberToObject(o, "shot", t->shot);
    cJSON_AddNumberToObject(o, "width", t->width);
    cJSON_AddNumberToObject(o, "height", t->height);
    cJSON_AddNumberToObject(o, "mm_per_px", t->mm_per_px);
    cJSON_AddStringToObject(o, "lighting",
                            mb_synth_lighting_name((int)t->lighting));
    cJSON_AddNumberToObject(o, "noise", t->noise_sigma);
    cJSON_AddNumberToObject(o, "blur", t->blur_sigma);
    cJSON *grey = cJSON_AddObjectToObject(o, "grey");
    if (grey) {
        cJSON_AddNumberToObject(grey, "part", t->grey_part);
        cJSON_AddNumberToObject(grey, "background", t->grey_background);
    }
    cJSON_AddBoolToObject(o, "present", t->present);
    cJSON_AddBoolToObject(o, "in_view", t->in_view);
    cJSON_AddBoolToObject(o, "good", t->good);
    cJSON *pose = cJSON_AddObjectToObject(o, "pose");
    if (pose) {
        cJSON_AddNumberToObject(pose, "x", r4(t->pose.tx));
        cJSON_AddNumberToObject(pose, "y", r4(t->pose.ty));
        cJSON_AddNumberToObject(pose, "angle_deg",
                                round(t->pose.angle * DEG * 1e6) / 1e6);
        cJSON_AddNumberToObject(pose, "size", round(t->size * 1e7) / 1e7);
    }
    const mb_synth_defect *d = &t->defect;
    cJSON *def = cJSON_AddObjectToObject(o, "defect");
    if (def) {
        cJSON_AddStringToObject(def, "type", mb_synth_defect_name(d->type));
        cJSON_AddNumberToObject(def, "size_mm", round(d->size_mm * 1e5) / 1e5);
        cJSON_AddNumberToObject(def, "extent_mm",
                                round(d->extent_mm * 1e5) / 1e5);
        cJSON_AddNumberToObject(def, "outline", d->outline);
        cJSON_AddNumberToObject(def, "arc",
                                d->arc < 0 ? -1 : round(d->arc * 1e6) / 1e6);
        cJSON_AddNumberToObject(def, "angle_deg",
                                round(d->angle * DEG * 1e4) / 1e4);
        cJSON_AddNumberToObject(def, "x", r4(d->x));
        cJSON_AddNumberToObject(def, "y", r4(d->y));
    }
    cJSON *outs = cJSON_AddArrayToObject(o, "outlines");
    const double *xy = t->outlines.xy;
    for (int k = 0; outs && k < t->outlines.n_outlines; k++) {
        cJSON *ol = cJSON_CreateArray();
        if (!ol)
            break;
        cJSON_AddItemToArray(outs, ol);
        for (int i = 0; i < t->outlines.counts[k]; i++, xy += 2)
            cJSON_AddItemToArray(ol, point_array(xy[0], xy[1]));
    }
    return o;
}

int mb_labels_write(mb_labels_writer *w, const char *image,
                    const mb_synth_truth *t, char *err)
{
    if (!w || !image || !t)
        return mb_err_set(err, MB_EINVAL, "labels: nothing to write");
    if (strlen(image) >= MB_LABEL_NAME_LEN)
        return mb_err_set(err, MB_EINVAL,
                          "%s: image name '%.40s...' is longer than %d bytes",
                          w->path, image, MB_LABEL_NAME_LEN - 1);
    if (t->outlines.n_outlines > 0 && !t->outlines.xy)
        return mb_err_set(err, MB_EINVAL, "%s: truth without outline points",
                          w->path);
    cJSON *o = record(image, t);
    char *s = o ? cJSON_PrintUnformatted(o) : NULL;
    cJSON_Delete(o);
    if (!s)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", w->path);
    int ok = fputs(s, w->f) >= 0 && fputc('\n', w->f) != EOF;
    cJSON_free(s);
    if (!ok)
        return mb_err_set(err, MB_EIO, "%s: write failed: %s", w->path,
                          strerror(errno));
    return 0;
}

int mb_labels_writer_close(mb_labels_writer *w, char *err)
{
    if (!w)
        return 0;
    int rc = 0;
    if (fclose(w->f) != 0)
        rc = mb_err_set(err, MB_EIO, "%s: write failed on close: %s", w->path,
                        strerror(errno));
    free(w->path);
    free(w);
    return rc;
}

/* ---- reader */

int mb_labels_reader_open(const char *path, mb_labels_reader **out, char *err)
{
    if (!path || !out)
        return mb_err_set(err, MB_EINVAL, "labels: no file name given");
    *out = NULL;
    mb_labels_reader *r = calloc(1, sizeof *r);
    if (!r || !(r->path = strdup(path))) {
        free(r);
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    }
    r->f = fopen(path, "r");
    if (!r->f) {
        int e = errno;
        free(r->path);
        free(r);
        return mb_err_set(err, e == ENOENT ? MB_ENOTFOUND : MB_EIO,
                          "%s: cannot open: %s", path, strerror(e));
    }
    *out = r;
    return 0;
}

void mb_labels_reader_close(mb_labels_reader *r)
{
    if (!r)
        return;
    if (r->f)
        fclose(r->f);
    free(r->path);
    free(r->line);
    free(r->xy);
    free(r);
}

static int get_string(const cJSON *obj, const char *name, const char *parent,
                      const char *key, const char **out, char *err)
{
    const cJSON *it;
    int rc = mb_json_member(obj, name, parent, key, MB_JSON_STRING, &it, err);
    if (rc < 0)
        return rc;
    *out = it->valuestring;
    return 0;
}

static int get_bool(const cJSON *obj, const char *name, const char *key,
                    int *out, char *err)
{
    const cJSON *it;
    int rc = mb_json_member(obj, name, "", key, MB_JSON_BOOL, &it, err);
    if (rc < 0)
        return rc;
    *out = cJSON_IsTrue(it) ? 1 : 0;
    return 0;
}

static int enum_field(const cJSON *obj, const char *name, const char *parent,
                      const char *key, int (*from_name)(const char *), int *out,
                      char *err)
{
    const char *s;
    int rc = get_string(obj, name, parent, key, &s, err);
    if (rc < 0)
        return rc;
    int v = from_name(s);
    if (v < 0) {
        char field[MB_JSON_FIELD_LEN];
        mb_json_field(field, parent, key);
        return mb_err_set(err, MB_EFORMAT, "%s: %s: unknown name \"%.60s\"",
                          name, field, s);
    }
    *out = v;
    return 0;
}

/* The outlines array into r->xy (grown as needed) and t->outlines. */
static int read_outlines(mb_labels_reader *r, const cJSON *root,
                         const char *name, mb_synth_truth *t, char *err)
{
    const cJSON *outs;
    int rc =
        mb_json_member(root, name, "", "outlines", MB_JSON_ARRAY, &outs, err);
    if (rc < 0)
        return rc;
    int no = cJSON_GetArraySize(outs);
    if (no > MB_MAX_OUTLINES)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: outlines: %d outlines, at most %d expected",
                          name, no, MB_MAX_OUTLINES);
    size_t total = 0;
    const cJSON *ol;
    cJSON_ArrayForEach(ol, outs) total += (size_t)cJSON_GetArraySize(ol);
    if (2 * total > r->xy_cap) {
        double *nxy = realloc(r->xy, sizeof(double) * 2 * total);
        if (!nxy)
            return mb_err_set(err, MB_ENOMEM, "%s: out of memory", name);
        r->xy = nxy;
        r->xy_cap = 2 * total;
    }
    int k = 0;
    size_t at = 0;
    cJSON_ArrayForEach(ol, outs)
    {
        char field[MB_JSON_FIELD_LEN];
        snprintf(field, sizeof field, "outlines[%d]", k);
        if (!cJSON_IsArray(ol))
            return mb_err_set(err, MB_EFORMAT,
                              "%s: %s: expected an array of points", name,
                              field);
        int n = cJSON_GetArraySize(ol);
        if (n < 3 || n > MB_MAX_OUTLINE_POINTS)
            return mb_err_set(err, MB_EFORMAT,
                              "%s: %s: %d points, expected 3..%d", name, field,
                              n, MB_MAX_OUTLINE_POINTS);
        int i = 0;
        const cJSON *pt;
        cJSON_ArrayForEach(pt, ol)
        {
            char pf[MB_JSON_FIELD_LEN];
            snprintf(pf, sizeof pf, "outlines[%d][%d]", k, i);
            rc = mb_json_numbers(pt, name, pf, 2, r->xy + at, err);
            if (rc < 0)
                return rc;
            at += 2;
            i++;
        }
        t->outlines.counts[k] = n;
        k++;
    }
    t->outlines.n_outlines = no;
    t->outlines.xy = r->xy;
    return 0;
}

static int parse_record(mb_labels_reader *r, const cJSON *root,
                        const char *name, mb_label *out, char *err)
{
    mb_synth_truth *t = &out->truth;
    int rc = mb_json_check_header(root, name, MB_LABELS_FORMAT,
                                  MB_LABELS_VERSION, err);
    if (rc < 0)
        return rc;
    const char *s;
    if ((rc = get_string(root, name, "", "image", &s, err)) < 0)
        return rc;
    if (strlen(s) >= MB_LABEL_NAME_LEN)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: image: name longer than %d bytes", name,
                          MB_LABEL_NAME_LEN - 1);
    snprintf(out->image, sizeof out->image, "%s", s);
    int fam, light, dtype;
    if ((rc = enum_field(root, name, "", "family", mb_synth_family_from_name,
                         &fam, err)) < 0 ||
        (rc = enum_field(root, name, "", "lighting",
                         mb_synth_lighting_from_name, &light, err)) < 0)
        return rc;
    t->family = (mb_synth_family)fam;
    t->part_number = mb_synth_part_number(fam);
    t->lighting = (mb_synth_lighting)light;
    if ((rc = get_string(root, name, "", "seed", &s, err)) < 0)
        return rc;
    char *end = NULL;
    errno = 0;
    unsigned long long seed = strtoull(s, &end, 10);
    if (errno || end == s || *end || s[0] == '-')
        return mb_err_set(
            err, MB_EFORMAT,
            "%s: seed: expected a decimal string, found \"%.40s\"", name, s);
    t->seed = seed;
    double v;
    if ((rc = mb_json_member_number(root, name, "", "index", &v, err)) < 0)
        return rc;
    if (v < 0 || v != floor(v) || v > 9007199254740992.0)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: index: expected a whole number >= 0", name);
    t->index = (uint64_t)v;
    if ((rc = mb_json_member_int(root, name, "", "shot", 0, 1 << 30, &t->shot,
                                 err)) < 0 ||
        (rc = mb_json_member_int(root, name, "", "width", 1, 1 << 16, &t->width,
                                 err)) < 0 ||
        (rc = mb_json_member_int(root, name, "", "height", 1, 1 << 16,
                                 &t->height, err)) < 0 ||
        (rc = mb_json_member_number(root, name, "", "mm_per_px", &t->mm_per_px,
                                    err)) < 0 ||
        (rc = mb_json_member_number(root, name, "", "noise", &t->noise_sigma,
                                    err)) < 0 ||
        (rc = mb_json_member_number(root, name, "", "blur", &t->blur_sigma,
                                    err)) < 0)
        return rc;
    if (!(t->mm_per_px > 0))
        return mb_err_set(err, MB_EFORMAT,
                          "%s: mm_per_px: expected a number > 0", name);
    const cJSON *grey, *pose, *def;
    if ((rc = mb_json_member(root, name, "", "grey", MB_JSON_OBJECT, &grey,
                             err)) < 0 ||
        (rc = mb_json_member_number(grey, name, "grey", "part", &t->grey_part,
                                    err)) < 0 ||
        (rc = mb_json_member_number(grey, name, "grey", "background",
                                    &t->grey_background, err)) < 0)
        return rc;
    if ((rc = get_bool(root, name, "present", &t->present, err)) < 0 ||
        (rc = get_bool(root, name, "in_view", &t->in_view, err)) < 0 ||
        (rc = get_bool(root, name, "good", &t->good, err)) < 0)
        return rc;
    double ang;
    if ((rc = mb_json_member(root, name, "", "pose", MB_JSON_OBJECT, &pose,
                             err)) < 0 ||
        (rc = mb_json_member_number(pose, name, "pose", "x", &t->pose.tx,
                                    err)) < 0 ||
        (rc = mb_json_member_number(pose, name, "pose", "y", &t->pose.ty,
                                    err)) < 0 ||
        (rc = mb_json_member_number(pose, name, "pose", "angle_deg", &ang,
                                    err)) < 0 ||
        (rc = mb_json_member_number(pose, name, "pose", "size", &t->size,
                                    err)) < 0)
        return rc;
    t->pose.angle = ang / DEG;
    t->pose.scale = 1.0 / t->mm_per_px;
    mb_synth_defect *d = &t->defect;
    if ((rc = mb_json_member(root, name, "", "defect", MB_JSON_OBJECT, &def,
                             err)) < 0 ||
        (rc = enum_field(def, name, "defect", "type", mb_synth_defect_from_name,
                         &dtype, err)) < 0 ||
        (rc = mb_json_member_number(def, name, "defect", "size_mm", &d->size_mm,
                                    err)) < 0 ||
        (rc = mb_json_member_number(def, name, "defect", "extent_mm",
                                    &d->extent_mm, err)) < 0 ||
        (rc = mb_json_member_int(def, name, "defect", "outline", -1,
                                 MB_MAX_OUTLINES - 1, &d->outline, err)) < 0 ||
        (rc = mb_json_member_number(def, name, "defect", "arc", &d->arc, err)) <
            0 ||
        (rc = mb_json_member_number(def, name, "defect", "angle_deg", &ang,
                                    err)) < 0 ||
        (rc = mb_json_member_number(def, name, "defect", "x", &d->x, err)) <
            0 ||
        (rc = mb_json_member_number(def, name, "defect", "y", &d->y, err)) < 0)
        return rc;
    d->type = dtype;
    d->angle = ang / DEG;
    return read_outlines(r, root, name, t, err);
}

int mb_labels_read(mb_labels_reader *r, mb_label *out, char *err)
{
    if (!r || !out)
        return mb_err_set(err, MB_EINVAL, "labels: no reader given");
    memset(out, 0, sizeof *out);
    for (;;) {
        errno = 0;
        ssize_t n = getline(&r->line, &r->line_cap, r->f);
        if (n < 0) {
            if (ferror(r->f))
                return mb_err_set(err, MB_EIO,
                                  "%s: read failed after line %d: %s", r->path,
                                  r->line_no, strerror(errno));
            return 0;
        }
        r->line_no++;
        size_t len = (size_t)n;
        while (len > 0 &&
               (r->line[len - 1] == '\n' || r->line[len - 1] == '\r' ||
                r->line[len - 1] == ' ' || r->line[len - 1] == '\t'))
            len--;
        size_t start = 0;
        while (start < len && (r->line[start] == ' ' || r->line[start] == '\t'))
            start++;
        if (start == len)
            continue; /* blank line */
        char name[MB_ERR_LEN / 2];
        snprintf(name, sizeof name, "%.200s line %d", r->path, r->line_no);
        cJSON *root = NULL;
        int rc = mb_json_parse(r->line + start, len - start, name, &root, err);
        if (rc < 0)
            return rc;
        if (!cJSON_IsObject(root)) {
            cJSON_Delete(root);
            return mb_err_set(err, MB_EFORMAT,
                              "%s: expected one JSON object per line", name);
        }
        rc = parse_record(r, root, name, out, err);
        cJSON_Delete(root);
        if (rc < 0)
            return rc;
        out->line = r->line_no;
        return 1;
    }
}
