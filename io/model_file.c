/*
 * io/model_file.c - the model file (layout in model_file.h).
 *
 * Checksum: CRC-32 as zlib's crc32() computes it (the ISO-HDLC / IEEE 802.3
 * polynomial 0x04C11DB7, reflected, initial and final XOR 0xFFFFFFFF) over
 * the payload as cJSON_PrintUnformatted prints it after parsing. The saver
 * computes it the same way (print, parse, print), so saver and loader agree
 * whatever cJSON's number printer does.
 *
 * Values: cJSON's printer may drop the last digit a double needs (it accepts
 * a 15-digit text within one ulp), so values are written as raw items by
 * mb_json_format_double, which guarantees an exact read-back.
 */
#include "model_file.h"
#include "part_sections.h"

#include "error.h"
#include "file_util.h"
#include "json_util.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zlib.h>

/* Largest model file read: 1 GiB (a model of 2 x 64 x 8192 coordinates and
   several modes stays well below). */
#define MODEL_MAX_BYTES ((size_t)1 << 30)
/* Largest shape dimension a layout allows. */
#define MODEL_MAX_DIM (2 * MB_MAX_OUTLINES * MB_MAX_OUTLINE_POINTS)

/* CRC-32 of the payload's compact print, see the file comment. */
static int payload_crc(const cJSON *payload, unsigned long *crc)
{
    char *s = cJSON_PrintUnformatted(payload);
    if (!s)
        return MB_ENOMEM;
    *crc = crc32_z(crc32_z(0L, Z_NULL, 0), (const Bytef *)s, strlen(s));
    cJSON_free(s);
    return MB_OK;
}

/* ---- saving ---- */

/* The first non-finite value of v[0..n-1], or -1. */
static int first_non_finite(const double *v, int n)
{
    for (int i = 0; i < n; i++)
        if (!isfinite(v[i]))
            return i;
    return -1;
}

static int check_finite(const mb_shape_model *m, char *err)
{
    int d = mb_shape_model_dim(m), k = mb_shape_model_n_modes(m);
    int bad;
    if ((bad = first_non_finite(mb_shape_model_mean(m), d)) >= 0)
        return mb_err_set(err, MB_ENUMERIC,
                          "model to save: mean[%d] is not finite", bad);
    if ((bad = first_non_finite(mb_shape_model_eig(m),
                                mb_shape_model_n_eig(m))) >= 0)
        return mb_err_set(err, MB_ENUMERIC,
                          "model to save: eigenvalue %d is not finite", bad);
    if ((bad = first_non_finite(mb_shape_model_modes(m), d * k)) >= 0)
        return mb_err_set(err, MB_ENUMERIC,
                          "model to save: mode %d, value %d is not finite",
                          bad / d, bad % d);
    if (!isfinite(mb_shape_model_info(m)->variance_fraction))
        return mb_err_set(err, MB_ENUMERIC,
                          "model to save: variance_fraction is not finite");
    return MB_OK;
}

static cJSON *build_payload(const mb_shape_model *m)
{
    const mb_train_info *ti = mb_shape_model_info(m);
    const mb_layout *l = mb_shape_model_layout(m);
    int d = mb_shape_model_dim(m), k = mb_shape_model_n_modes(m);
    int ok = 1;
    cJSON *p = cJSON_CreateObject();
    cJSON *tr = cJSON_CreateObject();
    cJSON *lay = cJSON_CreateObject();
    cJSON *sh = cJSON_CreateObject();
    mb_json_add(p, "training", tr, &ok);
    mb_json_add(p, "layout", lay, &ok);
    mb_json_add(p, "shape", sh, &ok);
    if (!ok) {
        cJSON_Delete(p);
        return NULL;
    }
    mb_json_add(tr, "samples", cJSON_CreateNumber(ti->n_samples), &ok);
    mb_json_add(tr, "gpa_iterations", cJSON_CreateNumber(ti->gpa_iterations),
                &ok);
    mb_json_add(tr, "gpa_converged", cJSON_CreateBool(ti->gpa_converged != 0),
                &ok);
    mb_json_add(tr, "variance_fraction",
                mb_json_raw_number(ti->variance_fraction), &ok);
    mb_json_add(tr, "fixed_modes", cJSON_CreateNumber(ti->fixed_modes), &ok);
    mb_json_add(tr, "created", cJSON_CreateString(ti->created), &ok);
    mb_json_add(tr, "source", cJSON_CreateString(ti->source), &ok);

    cJSON *counts = cJSON_CreateArray();
    mb_json_add(lay, "outlines", counts, &ok);
    for (int i = 0; ok && i < l->n_outlines; i++)
        mb_json_push(counts, cJSON_CreateNumber(l->counts[i]), &ok);

    mb_json_add(sh, "dim", cJSON_CreateNumber(d), &ok);
    mb_json_add(sh, "modes", cJSON_CreateNumber(k), &ok);
    if (ok)
        mb_json_add(sh, "mean",
                    mb_json_raw_array(mb_shape_model_mean(m), d, &ok), &ok);
    if (ok)
        mb_json_add(sh, "eigenvalues",
                    mb_json_raw_array(mb_shape_model_eig(m),
                                      mb_shape_model_n_eig(m), &ok),
                    &ok);
    cJSON *vecs = cJSON_CreateArray();
    mb_json_add(sh, "vectors", vecs, &ok);
    for (int j = 0; ok && j < k; j++)
        mb_json_push(
            vecs,
            mb_json_raw_array(mb_shape_model_modes(m) + (size_t)j * d, d, &ok),
            &ok);
    if (!ok) {
        cJSON_Delete(p);
        return NULL;
    }
    return p;
}

/* The document of a shape model, with the part sections when pm is given. */
static int print_doc(const mb_shape_model *m, const mb_part_model *pm,
                     char **text, size_t *len, char *err)
{
    if (!m || !text || !len)
        return mb_err_set(err, MB_EINVAL, "model print: no model or output");
    *text = NULL;
    *len = 0;
    int rc = check_finite(m, err);
    if (rc < 0)
        return rc;
    cJSON *root = NULL, *canon = NULL;
    char *compact = NULL, *pretty = NULL;
    cJSON *payload = build_payload(m);
    if (!payload)
        goto nomem;
    if (pm && (rc = mb_part_sections_add(payload, pm)) < 0) {
        if (rc == MB_ENUMERIC)
            mb_err_set(err, rc, "model to save: a limit or profile value is not finite");
        else
            mb_err_set(err, rc, "out of memory writing the model");
        goto done;
    }
    /* Checksum over the payload as a reader will see it: print, parse. */
    compact = cJSON_PrintUnformatted(payload);
    if (!compact || !(canon = cJSON_Parse(compact)))
        goto nomem;
    unsigned long crc;
    if (payload_crc(canon, &crc) < 0)
        goto nomem;
    char sum[32];
    snprintf(sum, sizeof sum, "crc32:%08lx", crc);

    int ok = 1;
    root = cJSON_CreateObject();
    if (!root)
        goto nomem;
    mb_json_add(root, "format", cJSON_CreateString(MB_MODEL_FORMAT), &ok);
    mb_json_add(root, "version", cJSON_CreateNumber(MB_MODEL_VERSION), &ok);
    mb_json_add(root, "checksum", cJSON_CreateString(sum), &ok);
    if (!ok)
        goto nomem;
    if (!cJSON_AddItemToObject(root, "payload", payload))
        goto nomem;
    payload = NULL; /* root owns it now */
    if (!(pretty = cJSON_Print(root)))
        goto nomem;
    size_t n = strlen(pretty);
    if (!(*text = malloc(n + 2)))
        goto nomem;
    memcpy(*text, pretty, n);
    (*text)[n] = '\n';
    (*text)[n + 1] = '\0';
    *len = n + 1;
    rc = MB_OK;
    goto done;
nomem:
    rc = mb_err_set(err, MB_ENOMEM, "out of memory writing the model");
done:
    cJSON_Delete(payload);
    cJSON_Delete(root);
    cJSON_Delete(canon);
    cJSON_free(compact);
    cJSON_free(pretty);
    return rc;
}

int mb_model_print(const mb_shape_model *m, char **text, size_t *len, char *err)
{
    return print_doc(m, NULL, text, len, err);
}

int mb_part_model_print(const mb_part_model *pm, char **text, size_t *len,
                        char *err)
{
    if (!pm)
        return mb_err_set(err, MB_EINVAL, "model print: no model");
    return print_doc(pm->shape, pm, text, len, err);
}

int mb_part_model_save(const char *path, const mb_part_model *pm, char *err)
{
    char inner[MB_ERR_LEN];
    if (!path || !pm || !pm->shape)
        return mb_err_set(err, MB_EINVAL, "model save: no file name or model");
    char *text = NULL;
    size_t len = 0;
    int rc = mb_part_model_print(pm, &text, &len, inner);
    if (rc < 0)
        return mb_err_set(err, rc, "%s: %s", path, inner);
    rc = mb_file_write_atomic(path, text, len, err);
    free(text);
    return rc;
}

int mb_model_save(const char *path, const mb_shape_model *m, char *err)
{
    char inner[MB_ERR_LEN];
    if (!path || !m)
        return mb_err_set(err, MB_EINVAL, "model save: no file name or model");
    char *text = NULL;
    size_t len = 0;
    int rc = mb_model_print(m, &text, &len, inner);
    if (rc < 0)
        return mb_err_set(err, rc, "%s: %s", path, inner);
    rc = mb_file_write_atomic(path, text, len, err);
    free(text);
    return rc;
}

/* ---- loading ---- */

/* Arrays read from the payload before the model is made. */
typedef struct {
    mb_layout layout;
    mb_train_info info;
    int dim, k, n_eig;
    double *mean, *eig, *modes;
} model_parts;

static void parts_free(model_parts *p)
{
    free(p->mean);
    free(p->eig);
    free(p->modes);
}

static int check_checksum(const cJSON *root, const char *name, char *err)
{
    const cJSON *sum, *payload;
    int rc =
        mb_json_member(root, name, "", "checksum", MB_JSON_STRING, &sum, err);
    if (rc < 0)
        return rc;
    const char *s = sum->valuestring;
    int good = strncmp(s, "crc32:", 6) == 0 && strlen(s) == 14;
    for (int i = 6; good && i < 14; i++)
        good = (s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f') ||
               (s[i] >= 'A' && s[i] <= 'F');
    if (!good)
        return mb_json_expected(err, MB_EFORMAT, name, "checksum", sum,
                                "\"crc32:\" and 8 hex digits");
    unsigned long want = strtoul(s + 6, NULL, 16), have;
    rc = mb_json_member(root, name, "", "payload", MB_JSON_OBJECT, &payload,
                        err);
    if (rc < 0)
        return rc;
    if (payload_crc(payload, &have) < 0)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", name);
    if (have != want)
        return mb_err_set(err, MB_ECHECKSUM,
                          "%s: checksum: the payload's CRC-32 is %08lx but the "
                          "file says %08lx; the file was changed or damaged "
                          "after it was written",
                          name, have, want);
    return MB_OK;
}

static int read_string(const cJSON *obj, const char *name, const char *parent,
                       const char *key, char *dst, size_t size, char *err)
{
    const cJSON *it;
    int rc = mb_json_member(obj, name, parent, key, MB_JSON_STRING, &it, err);
    if (rc < 0)
        return rc;
    if (strlen(it->valuestring) >= size)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: %s.%s: expected at most %zu bytes, found %zu",
                          name, parent, key, size - 1, strlen(it->valuestring));
    strcpy(dst, it->valuestring);
    return MB_OK;
}

static int read_training(const cJSON *payload, const char *name,
                         mb_train_info *ti, char *err)
{
    const char *at = "payload.training";
    const cJSON *tr, *conv;
    int rc;
    if ((rc = mb_json_member(payload, name, "payload", "training",
                             MB_JSON_OBJECT, &tr, err)) < 0 ||
        (rc = mb_json_member_int(tr, name, at, "samples", 0, 1 << 30,
                                 &ti->n_samples, err)) < 0 ||
        (rc = mb_json_member_int(tr, name, at, "gpa_iterations", 0, 1 << 30,
                                 &ti->gpa_iterations, err)) < 0 ||
        (rc = mb_json_member(tr, name, at, "gpa_converged", MB_JSON_BOOL, &conv,
                             err)) < 0 ||
        (rc = mb_json_member_number(tr, name, at, "variance_fraction",
                                    &ti->variance_fraction, err)) < 0 ||
        (rc = mb_json_member_int(tr, name, at, "fixed_modes", 0, MODEL_MAX_DIM,
                                 &ti->fixed_modes, err)) < 0 ||
        (rc = read_string(tr, name, at, "created", ti->created,
                          sizeof ti->created, err)) < 0 ||
        (rc = read_string(tr, name, at, "source", ti->source, sizeof ti->source,
                          err)) < 0)
        return rc;
    ti->gpa_converged = cJSON_IsTrue(conv);
    if (!(ti->variance_fraction >= 0.0 && ti->variance_fraction <= 1.0))
        return mb_err_set(err, MB_EFORMAT,
                          "%s: %s.variance_fraction: expected a number from 0 "
                          "to 1, found %.17g",
                          name, at, ti->variance_fraction);
    return MB_OK;
}

static int read_layout(const cJSON *payload, const char *name, mb_layout *l,
                       char *err)
{
    const cJSON *lay, *counts, *it;
    char field[MB_JSON_FIELD_LEN];
    int rc;
    if ((rc = mb_json_member(payload, name, "payload", "layout", MB_JSON_OBJECT,
                             &lay, err)) < 0 ||
        (rc = mb_json_member(lay, name, "payload.layout", "outlines",
                             MB_JSON_ARRAY, &counts, err)) < 0)
        return rc;
    int n = cJSON_GetArraySize(counts);
    if (n < 1 || n > MB_MAX_OUTLINES)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: payload.layout.outlines: expected 1 to %d "
                          "outlines, found %d",
                          name, MB_MAX_OUTLINES, n);
    memset(l, 0, sizeof *l);
    l->n_outlines = n;
    int i = 0;
    cJSON_ArrayForEach(it, counts)
    {
        snprintf(field, sizeof field, "payload.layout.outlines[%d]", i);
        if ((rc = mb_json_int(it, name, field, 3, MB_MAX_OUTLINE_POINTS,
                              &l->counts[i], err)) < 0)
            return rc;
        l->n_points += l->counts[i];
        i++;
    }
    return MB_OK;
}

/* Sizes of the shape arrays, all checked before anything is allocated so a
   damaged file cannot ask for more memory than it holds numbers. */
static int read_shape_sizes(const cJSON *sh, const char *name, model_parts *p,
                            const cJSON **mean, const cJSON **eig,
                            const cJSON **vecs, char *err)
{
    const char *at = "payload.shape";
    const cJSON *it;
    int rc;
    if ((rc = mb_json_member_int(sh, name, at, "dim", 2, MODEL_MAX_DIM, &p->dim,
                                 err)) < 0)
        return rc;
    if (p->dim != 2 * p->layout.n_points)
        return mb_err_set(err, MB_ESIZE,
                          "%s: payload.shape.dim: %d does not match the "
                          "layout's 2 x %d points = %d coordinates",
                          name, p->dim, p->layout.n_points,
                          2 * p->layout.n_points);
    if ((rc = mb_json_member_int(sh, name, at, "modes", 1, p->dim, &p->k,
                                 err)) < 0 ||
        (rc = mb_json_member(sh, name, at, "mean", MB_JSON_ARRAY, mean, err)) <
            0 ||
        (rc = mb_json_member(sh, name, at, "eigenvalues", MB_JSON_ARRAY, eig,
                             err)) < 0 ||
        (rc = mb_json_member(sh, name, at, "vectors", MB_JSON_ARRAY, vecs,
                             err)) < 0)
        return rc;
    int n = cJSON_GetArraySize(*mean);
    if (n != p->dim)
        return mb_err_set(err, MB_ESIZE,
                          "%s: payload.shape.mean: expected dim = %d numbers, "
                          "found %d",
                          name, p->dim, n);
    p->n_eig = cJSON_GetArraySize(*eig);
    if (p->n_eig < p->k || p->n_eig > p->dim)
        return mb_err_set(err, MB_ESIZE,
                          "%s: payload.shape.eigenvalues: expected from modes "
                          "= %d to dim = %d numbers, found %d",
                          name, p->k, p->dim, p->n_eig);
    n = cJSON_GetArraySize(*vecs);
    if (n != p->k)
        return mb_err_set(err, MB_ESIZE,
                          "%s: payload.shape.vectors: expected modes = %d "
                          "arrays, found %d",
                          name, p->k, n);
    int j = 0;
    cJSON_ArrayForEach(it, *vecs)
    {
        char field[MB_JSON_FIELD_LEN];
        snprintf(field, sizeof field, "payload.shape.vectors[%d]", j);
        if (!cJSON_IsArray(it))
            return mb_json_expected(err, MB_EFORMAT, name, field, it,
                                    "an array of %d numbers", p->dim);
        if ((n = cJSON_GetArraySize(it)) != p->dim)
            return mb_err_set(err, MB_ESIZE,
                              "%s: %s: expected dim = %d numbers, found %d",
                              name, field, p->dim, n);
        j++;
    }
    return MB_OK;
}

static int read_shape(const cJSON *payload, const char *name, model_parts *p,
                      char *err)
{
    const cJSON *sh, *mean, *eig, *vecs, *it;
    char field[MB_JSON_FIELD_LEN];
    int rc;
    if ((rc = mb_json_member(payload, name, "payload", "shape", MB_JSON_OBJECT,
                             &sh, err)) < 0 ||
        (rc = read_shape_sizes(sh, name, p, &mean, &eig, &vecs, err)) < 0)
        return rc;
    p->mean = malloc((size_t)p->dim * sizeof *p->mean);
    p->eig = malloc((size_t)p->n_eig * sizeof *p->eig);
    p->modes = malloc((size_t)p->dim * (size_t)p->k * sizeof *p->modes);
    if (!p->mean || !p->eig || !p->modes)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory for the model",
                          name);
    if ((rc = mb_json_numbers(mean, name, "payload.shape.mean", p->dim, p->mean,
                              err)) < 0 ||
        (rc = mb_json_numbers(eig, name, "payload.shape.eigenvalues", p->n_eig,
                              p->eig, err)) < 0)
        return rc;
    int j = 0;
    cJSON_ArrayForEach(it, vecs)
    {
        snprintf(field, sizeof field, "payload.shape.vectors[%d]", j);
        if ((rc = mb_json_numbers(it, name, field, p->dim,
                                  p->modes + (size_t)j * p->dim, err)) < 0)
            return rc;
        j++;
    }
    return MB_OK;
}

static int parse_doc(const char *text, size_t len, const char *name,
                     mb_shape_model **out, mb_part_model *pm, char *err)
{
    if (!out || (!text && len))
        return mb_err_set(err, MB_EINVAL, "model parse: no text or output");
    *out = NULL;
    if (!name)
        name = "model";
    cJSON *root = NULL;
    model_parts p;
    memset(&p, 0, sizeof p);
    const cJSON *payload;
    int rc = mb_json_parse(text ? text : "", len, name, &root, err);
    if (rc < 0)
        return rc;
    if ((rc = mb_json_check_header(root, name, MB_MODEL_FORMAT,
                                   MB_MODEL_VERSION, err)) < 0 ||
        (rc = check_checksum(root, name, err)) < 0)
        goto done;
    payload = cJSON_GetObjectItemCaseSensitive(root, "payload");
    if ((rc = read_training(payload, name, &p.info, err)) < 0 ||
        (rc = read_layout(payload, name, &p.layout, err)) < 0 ||
        (rc = read_shape(payload, name, &p, err)) < 0)
        goto done;
    char inner[MB_ERR_LEN];
    rc = mb_shape_model_create(&p.layout, p.k, p.mean, p.modes, p.dim, p.n_eig,
                               p.eig, &p.info, out, inner);
    if (rc < 0) {
        mb_err_set(err, rc, "%s: payload.shape: %s", name, inner);
        goto done;
    }
    if (pm) {
        pm->shape = *out;
        *out = NULL;
        if ((rc = mb_part_sections_read(payload, name, pm, err)) < 0)
            mb_part_model_free(pm);
    }
done:
    parts_free(&p);
    cJSON_Delete(root);
    return rc;
}

int mb_model_parse(const char *text, size_t len, const char *name,
                   mb_shape_model **out, char *err)
{
    return parse_doc(text, len, name, out, NULL, err);
}

int mb_part_model_parse(const char *text, size_t len, const char *name,
                        mb_part_model *pm, char *err)
{
    mb_shape_model *sm = NULL;
    if (!pm)
        return mb_err_set(err, MB_EINVAL, "model parse: no output");
    memset(pm, 0, sizeof *pm);
    return parse_doc(text, len, name ? name : "model", &sm, pm, err);
}

int mb_part_model_load(const char *path, mb_part_model *pm, char *err)
{
    if (!path || !pm)
        return mb_err_set(err, MB_EINVAL, "model load: no file name or output");
    memset(pm, 0, sizeof *pm);
    char *text;
    size_t len;
    int rc = mb_file_read_all(path, MODEL_MAX_BYTES, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_part_model_parse(text, len, path, pm, err);
    free(text);
    return rc;
}

int mb_model_load(const char *path, mb_shape_model **out, char *err)
{
    if (!path || !out)
        return mb_err_set(err, MB_EINVAL, "model load: no file name or output");
    *out = NULL;
    char *text;
    size_t len;
    int rc = mb_file_read_all(path, MODEL_MAX_BYTES, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_model_parse(text, len, path, out, err);
    free(text);
    return rc;
}
