/*
 * io/part_sections.c - reading and writing the part-model sections of the
 * model file (see part_sections.h). Numbers go through mb_json_raw_number
 * so a round trip is bit-exact.
 */
#include "part_sections.h"

#include "error.h"
#include "file_util.h"
#include "json_util.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static void put(cJSON *o, const char *key, double v, int *ok)
{
    mb_json_add(o, key, mb_json_raw_number(v), ok);
}

static void put_array(cJSON *o, const char *key, const double *v, size_t n,
                      int *ok)
{
    mb_json_add(o, key, mb_json_raw_array(v, n, ok), ok);
}

static cJSON *section(cJSON *payload, const char *key, int *ok)
{
    cJSON *o = cJSON_CreateObject();
    if (!o || !cJSON_AddItemToObject(payload, key, o)) {
        cJSON_Delete(o);
        *ok = 0;
        return NULL;
    }
    return o;
}

static void add_limits(cJSON *payload, const mb_limits *l, int *ok)
{
    cJSON *o = section(payload, "limits", ok);
    if (!o)
        return;
    put(o, "alpha", l->alpha, ok);
    put(o, "n_train", l->n_train, ok);
    put(o, "n_modes", l->n_modes, ok);
    put(o, "n_judged", l->n_judged, ok);
    put_array(o, "mode_band", l->mode_band, (size_t)l->n_judged, ok);
    put(o, "t2_limit", l->t2_limit, ok);
    put(o, "t2_phase2", l->t2_phase2, ok);
    put(o, "t2_inflation", l->t2_inflation, ok);
    put(o, "spe_limit", l->spe_limit, ok);
    put(o, "spe_jm", l->spe_jm, ok);
    put(o, "size_mean", l->size_mean, ok);
    put(o, "size_lo", l->size_lo, ok);
    put(o, "size_hi", l->size_hi, ok);
    put(o, "size_sd", l->size_sd, ok);
    put_array(o, "local_sigma", l->local_sigma, (size_t)l->n_landmarks, ok);
    put_array(o, "local_limit", l->local_limit, (size_t)l->n_landmarks, ok);
    put(o, "loo_rejects", l->loo_rejects, ok);
    put(o, "frr_loo", l->frr_loo, ok);
    put(o, "frr_upper", l->frr_upper, ok);
}

static void add_profiles(cJSON *payload, const mb_profile_model *pm, int *ok)
{
    const mb_profile_params *pp = mb_profile_model_params(pm);
    const mb_profile_stats *st = mb_profile_model_stats(pm);
    const mb_layout *l = mb_profile_model_layout(pm);
    int n = l->n_points, p = mb_profile_model_len(pm), lv = pp->levels;
    size_t tri = (size_t)p * (p + 1) / 2;
    double *means = malloc((size_t)lv * n * p * sizeof *means);
    double *cov = malloc((size_t)lv * n * tri * sizeof *cov);
    cJSON *o = section(payload, "profiles", ok);
    if (!means || !cov || !o) {
        *ok = 0;
        goto done;
    }
    for (int L = 0; L < lv; L++)
        for (int i = 0; i < n; i++) {
            memcpy(means + ((size_t)L * n + i) * p, mb_profile_model_mean(pm, L, i),
                   (size_t)p * sizeof *means);
            const double *c = mb_profile_model_cov(pm, L, i);
            double *dst = cov + ((size_t)L * n + i) * tri;
            size_t t = 0;
            for (int col = 0; col < p; col++)
                for (int row = 0; row <= col; row++)
                    dst[t++] = c[row + (size_t)col * p];
        }
    put(o, "levels", lv, ok);
    put(o, "half_len", pp->half_len, ok);
    put(o, "shrink", pp->shrink, ok);
    put(o, "floor", pp->floor, ok);
    put(o, "samples", st->n_samples, ok);
    put(o, "part_grey", st->part_grey, ok);
    put(o, "back_grey", st->back_grey, ok);
    put(o, "area", st->area, ok);
    put(o, "size", st->size, ok);
    put_array(o, "means", means, (size_t)lv * n * p, ok);
    put_array(o, "cov_upper", cov, (size_t)lv * n * tri, ok);
done:
    free(means);
    free(cov);
}

static const char *const gauge_kinds[] = {
    "", "diameter", "width-min", "width-max", "spacing", "length", "area"};

static void add_gauges(cJSON *payload, const mb_part_model *pm, int *ok)
{
    cJSON *a = cJSON_CreateArray();
    if (!a || !cJSON_AddItemToObject(payload, "gauges", a)) {
        cJSON_Delete(a);
        *ok = 0;
        return;
    }
    for (int g = 0; g < pm->n_gauges && *ok; g++) {
        const mb_gauge_def *d = &pm->gauges[g];
        cJSON *o = cJSON_CreateObject();
        if (!o || !cJSON_AddItemToArray(a, o)) {
            cJSON_Delete(o);
            *ok = 0;
            return;
        }
        if (!cJSON_AddStringToObject(o, "name", d->name) ||
            !cJSON_AddStringToObject(o, "kind", gauge_kinds[d->kind]))
            *ok = 0;
        put(o, "outline", d->a, ok);
        if (d->kind == MB_GAUGE_SPACING)
            put(o, "outline_b", d->b, ok);
        put(o, "nominal_mm", d->nominal, ok);
        put(o, "tol_lo_mm", d->tol_lo, ok);
        put(o, "tol_hi_mm", d->tol_hi, ok);
        put(o, "taught_mean_mm", d->taught_mean, ok);
        put(o, "taught_sd_mm", d->taught_sd, ok);
    }
}

int mb_part_sections_add(cJSON *payload, const mb_part_model *pm)
{
    int ok = 1;
    if (!payload || !pm)
        return MB_EINVAL;
    cJSON *part = section(payload, "part", &ok);
    if (part && !cJSON_AddStringToObject(part, "name", pm->name))
        ok = 0;
    cJSON *im = section(payload, "imaging", &ok);
    if (im) {
        put(im, "width", pm->imaging.width, &ok);
        put(im, "height", pm->imaging.height, &ok);
        put(im, "mm_per_px", pm->imaging.mm_per_px, &ok);
        put(im, "dark_part", pm->imaging.dark_part, &ok);
    }
    if (pm->has_limits)
        add_limits(payload, &pm->limits, &ok);
    if (pm->profiles)
        add_profiles(payload, pm->profiles, &ok);
    if (pm->n_gauges > 0)
        add_gauges(payload, pm, &ok);
    return ok ? MB_OK : MB_ENOMEM;
}

/* ---- reading ---------------------------------------------------------- */

static int get_num(const cJSON *o, const char *name, const char *parent,
                   const char *key, double *v, char *err)
{
    return mb_json_member_number(o, name, parent, key, v, err);
}

static int get_int(const cJSON *o, const char *name, const char *parent,
                   const char *key, int lo, int hi, int *v, char *err)
{
    return mb_json_member_int(o, name, parent, key, lo, hi, v, err);
}

static int get_array(const cJSON *o, const char *name, const char *parent,
                     const char *key, int n, double *out, char *err)
{
    const cJSON *a;
    char field[MB_JSON_FIELD_LEN];
    int rc = mb_json_member(o, name, parent, key, MB_JSON_ARRAY, &a, err);
    if (rc < 0)
        return rc;
    mb_json_field(field, parent, key);
    return mb_json_numbers(a, name, field, n, out, err);
}

/* An optional section of the payload: 1 and *o when present, 0 when not,
   MB_EFORMAT with the sentence when it is not an object. */
static int optional_section(const cJSON *payload, const char *key,
                            const char *name, const char *par,
                            const cJSON **o, char *err)
{
    *o = cJSON_GetObjectItemCaseSensitive(payload, key);
    if (!*o)
        return 0;
    if (!cJSON_IsObject(*o))
        return mb_err_set(err, MB_EFORMAT, "%s: %s: expected an object", name, par);
    return 1;
}

static int read_imaging(const cJSON *payload, const char *name,
                        mb_part_model *pm, char *err)
{
    const cJSON *o;
    const char *par = "payload.imaging";
    int present = optional_section(payload, "imaging", name, par, &o, err);
    if (present <= 0)
        return present;
    int rc;
    if ((rc = get_int(o, name, par, "width", 0, 65536, &pm->imaging.width, err)) < 0 ||
        (rc = get_int(o, name, par, "height", 0, 65536, &pm->imaging.height, err)) < 0 ||
        (rc = get_num(o, name, par, "mm_per_px", &pm->imaging.mm_per_px, err)) < 0 ||
        (rc = get_int(o, name, par, "dark_part", 0, 1, &pm->imaging.dark_part, err)) < 0)
        return rc;
    if (pm->imaging.mm_per_px < 0)
        return mb_err_set(err, MB_EFORMAT, "%s: %s.mm_per_px: expected 0 (unknown) "
                          "or a positive scale", name, par);
    return MB_OK;
}

static int read_limits(const cJSON *payload, const char *name,
                       mb_part_model *pm, char *err)
{
    const cJSON *o;
    const char *par = "payload.limits";
    int present = optional_section(payload, "limits", name, par, &o, err);
    if (present <= 0)
        return present;
    mb_limits *l = &pm->limits;
    int n = mb_shape_model_layout(pm->shape)->n_points;
    int k = mb_shape_model_n_modes(pm->shape), rc;
    if ((rc = mb_limits_alloc(l, n)) < 0)
        return mb_err_set(err, rc, "%s: out of memory", name);
    pm->has_limits = 1;
    if ((rc = get_num(o, name, par, "alpha", &l->alpha, err)) < 0 ||
        (rc = get_int(o, name, par, "n_train", 2, 1000000, &l->n_train, err)) < 0 ||
        (rc = get_int(o, name, par, "n_modes", k, k, &l->n_modes, err)) < 0 ||
        (rc = get_int(o, name, par, "n_judged", 0,
                      k < MB_MAX_JUDGED_MODES ? k : MB_MAX_JUDGED_MODES,
                      &l->n_judged, err)) < 0 ||
        (rc = get_array(o, name, par, "mode_band", l->n_judged, l->mode_band, err)) < 0 ||
        (rc = get_num(o, name, par, "t2_limit", &l->t2_limit, err)) < 0 ||
        (rc = get_num(o, name, par, "t2_phase2", &l->t2_phase2, err)) < 0 ||
        (rc = get_num(o, name, par, "t2_inflation", &l->t2_inflation, err)) < 0 ||
        (rc = get_num(o, name, par, "spe_limit", &l->spe_limit, err)) < 0 ||
        (rc = get_num(o, name, par, "spe_jm", &l->spe_jm, err)) < 0 ||
        (rc = get_num(o, name, par, "size_mean", &l->size_mean, err)) < 0 ||
        (rc = get_num(o, name, par, "size_lo", &l->size_lo, err)) < 0 ||
        (rc = get_num(o, name, par, "size_hi", &l->size_hi, err)) < 0 ||
        (rc = get_num(o, name, par, "size_sd", &l->size_sd, err)) < 0 ||
        (rc = get_array(o, name, par, "local_sigma", n, l->local_sigma, err)) < 0 ||
        (rc = get_array(o, name, par, "local_limit", n, l->local_limit, err)) < 0 ||
        (rc = get_int(o, name, par, "loo_rejects", 0, 1000000, &l->loo_rejects, err)) < 0 ||
        (rc = get_num(o, name, par, "frr_loo", &l->frr_loo, err)) < 0 ||
        (rc = get_num(o, name, par, "frr_upper", &l->frr_upper, err)) < 0)
        return rc;
    if (!(l->alpha > 0 && l->alpha < 1) || !(l->t2_limit > 0) ||
        !(l->spe_limit > 0) || !(l->size_lo < l->size_hi))
        return mb_err_set(err, MB_EFORMAT,
                          "%s: %s: limits out of range (alpha in (0,1), positive "
                          "T^2 and residual limits, size_lo < size_hi expected)",
                          name, par);
    for (int j = 0; j < n; j++)
        if (!(l->local_limit[j] > 0))
            return mb_err_set(err, MB_EFORMAT, "%s: %s.local_limit[%d]: expected "
                              "a positive number", name, par, j);
    return MB_OK;
}

static int read_profiles(const cJSON *payload, const char *name,
                         mb_part_model *pm, char *err)
{
    const cJSON *o;
    const char *par = "payload.profiles";
    int present = optional_section(payload, "profiles", name, par, &o, err);
    if (present <= 0)
        return present;
    const mb_layout *layout = mb_shape_model_layout(pm->shape);
    mb_profile_params pp;
    mb_profile_stats st;
    int rc;
    mb_profile_params_default(&pp);
    memset(&st, 0, sizeof st);
    if ((rc = get_int(o, name, par, "levels", 1, MB_PYRAMID_MAX_LEVELS, &pp.levels, err)) < 0 ||
        (rc = get_int(o, name, par, "half_len", 1, MB_PROFILE_MAX_HALF, &pp.half_len, err)) < 0 ||
        (rc = get_num(o, name, par, "shrink", &pp.shrink, err)) < 0 ||
        (rc = get_num(o, name, par, "floor", &pp.floor, err)) < 0 ||
        (rc = get_int(o, name, par, "samples", 2, 1000000, &st.n_samples, err)) < 0 ||
        (rc = get_num(o, name, par, "part_grey", &st.part_grey, err)) < 0 ||
        (rc = get_num(o, name, par, "back_grey", &st.back_grey, err)) < 0 ||
        (rc = get_num(o, name, par, "area", &st.area, err)) < 0 ||
        (rc = get_num(o, name, par, "size", &st.size, err)) < 0)
        return rc;
    int n = layout->n_points, p = 2 * pp.half_len + 1;
    size_t tri = (size_t)p * (p + 1) / 2, nm = (size_t)pp.levels * n;
    double *means = malloc(nm * p * sizeof *means);
    double *upper = malloc(nm * tri * sizeof *upper);
    double *cov = malloc(nm * p * p * sizeof *cov);
    if (!means || !upper || !cov) {
        rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory", name);
        goto done;
    }
    if ((rc = get_array(o, name, par, "means", (int)(nm * p), means, err)) < 0 ||
        (rc = get_array(o, name, par, "cov_upper", (int)(nm * tri), upper, err)) < 0)
        goto done;
    for (size_t q = 0; q < nm; q++) {
        const double *src = upper + q * tri;
        double *c = cov + q * p * p;
        size_t t = 0;
        for (int col = 0; col < p; col++)
            for (int row = 0; row <= col; row++) {
                c[row + (size_t)col * p] = src[t];
                c[col + (size_t)row * p] = src[t];
                t++;
            }
    }
    char perr[MB_ERR_LEN] = "";
    rc = mb_profile_model_create(layout, &pp, &st, means, cov, &pm->profiles, perr);
    if (rc < 0)
        mb_err_set(err, rc, "%s: %s: %s", name, par, perr);
done:
    free(means);
    free(upper);
    free(cov);
    return rc;
}

int mb_gauges_read(const cJSON *array, const char *name, const char *field,
                   int n_outlines, mb_gauge_def *defs, int *n, char *err)
{
    if (!cJSON_IsArray(array))
        return mb_err_set(err, MB_EFORMAT, "%s: %s: expected an array of gauges",
                          name, field);
    int count = cJSON_GetArraySize(array), rc;
    if (count > MB_MAX_GAUGES)
        return mb_err_set(err, MB_ERANGE, "%s: %s: %d gauges, at most %d allowed",
                          name, field, count, MB_MAX_GAUGES);
    *n = 0;
    for (int g = 0; g < count; g++) {
        const cJSON *o = cJSON_GetArrayItem(array, g);
        char par[MB_JSON_FIELD_LEN];
        snprintf(par, sizeof par, "%s[%d]", field, g);
        mb_gauge_def *d = &defs[g];
        memset(d, 0, sizeof *d);
        if (!cJSON_IsObject(o))
            return mb_err_set(err, MB_EFORMAT, "%s: %s: expected an object", name, par);
        const cJSON *nm = cJSON_GetObjectItemCaseSensitive(o, "name");
        const cJSON *kd = cJSON_GetObjectItemCaseSensitive(o, "kind");
        if (!cJSON_IsString(nm) || !nm->valuestring[0])
            return mb_err_set(err, MB_EFORMAT, "%s: %s.name: expected a name", name, par);
        snprintf(d->name, sizeof d->name, "%s", nm->valuestring);
        d->kind = 0;
        for (int k = 1; cJSON_IsString(kd) && k <= MB_GAUGE_AREA; k++)
            if (!strcmp(kd->valuestring, gauge_kinds[k]))
                d->kind = (mb_gauge_kind)k;
        if (!d->kind)
            return mb_err_set(err, MB_EFORMAT,
                              "%s: %s.kind: expected one of diameter, width-min, "
                              "width-max, spacing, length, area", name, par);
        int hi = n_outlines > 0 ? n_outlines - 1 : MB_MAX_OUTLINES - 1;
        if ((rc = get_int(o, name, par, "outline", 0, hi, &d->a, err)) < 0)
            return rc;
        if (d->kind == MB_GAUGE_SPACING &&
            (rc = get_int(o, name, par, "outline_b", 0, hi, &d->b, err)) < 0)
            return rc;
        if ((rc = get_num(o, name, par, "nominal_mm", &d->nominal, err)) < 0 ||
            (rc = get_num(o, name, par, "tol_lo_mm", &d->tol_lo, err)) < 0 ||
            (rc = get_num(o, name, par, "tol_hi_mm", &d->tol_hi, err)) < 0)
            return rc;
        if (!(d->tol_lo <= 0 && d->tol_hi >= 0 && d->tol_hi > d->tol_lo))
            return mb_err_set(err, MB_ERANGE,
                              "%s: %s: expected tol_lo_mm <= 0 <= tol_hi_mm and a "
                              "tolerance band wider than zero", name, par);
        if (cJSON_GetObjectItemCaseSensitive(o, "taught_mean_mm") &&
            ((rc = get_num(o, name, par, "taught_mean_mm", &d->taught_mean, err)) < 0 ||
             (rc = get_num(o, name, par, "taught_sd_mm", &d->taught_sd, err)) < 0))
            return rc;
        *n = g + 1;
    }
    return MB_OK;
}

int mb_gauges_load(const char *path, mb_gauge_def *defs, int *n, char *err)
{
    char *text = NULL;
    size_t len = 0;
    cJSON *root = NULL;
    int rc = mb_file_read_all(path, (size_t)1 << 20, &text, &len, err);
    if (rc < 0)
        return rc;
    if ((rc = mb_json_parse(text, len, path, &root, err)) == 0 &&
        (rc = mb_json_check_header(root, path, "modeband-gauges", 1, err)) == 0)
        rc = mb_gauges_read(cJSON_GetObjectItemCaseSensitive(root, "gauges"), path,
                            "gauges", 0, defs, n, err);
    cJSON_Delete(root);
    free(text);
    return rc;
}

int mb_part_sections_read(const cJSON *payload, const char *name,
                          mb_part_model *pm, char *err)
{
    if (!payload || !pm || !pm->shape)
        return MB_EINVAL;
    const cJSON *part = cJSON_GetObjectItemCaseSensitive(payload, "part");
    if (part) {
        const cJSON *nm = cJSON_GetObjectItemCaseSensitive(part, "name");
        if (!cJSON_IsObject(part) || !cJSON_IsString(nm))
            return mb_err_set(err, MB_EFORMAT, "%s: payload.part.name: expected "
                              "a string", name);
        snprintf(pm->name, sizeof pm->name, "%s", nm->valuestring);
    }
    int rc;
    if ((rc = read_imaging(payload, name, pm, err)) < 0 ||
        (rc = read_limits(payload, name, pm, err)) < 0 ||
        (rc = read_profiles(payload, name, pm, err)) < 0)
        return rc;
    const cJSON *g = cJSON_GetObjectItemCaseSensitive(payload, "gauges");
    if (g && (rc = mb_gauges_read(g, name, "payload.gauges",
                                  mb_shape_model_layout(pm->shape)->n_outlines,
                                  pm->gauges, &pm->n_gauges, err)) < 0)
        return rc;
    return MB_OK;
}
