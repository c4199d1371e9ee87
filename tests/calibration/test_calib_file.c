/*
 * tests/calibration/test_calib_file.c - the calibration document
 * (io/calib_file.h): a bit-exact round trip, the frame-size check, and one
 * test per kind of bad document, each asserting the exact MB_E code and
 * that the sentence names the file and the field.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "calib_file.h"
#include "camera.h"
#include "error.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define NAME "cal.json"

/* A valid calibration with awkward values (thirds, tiny and negative
   numbers) in every field. */
static mb_calib sample(void)
{
    mb_calib c;
    memset(&c, 0, sizeof c);
    c.width = 1280;
    c.height = 1024;
    const double h[9] = {4.0 / 3.0,     -1e-3 / 7.0, 2.5e-5, 0.1 / 3.0, 4.1,
                         -1.0e-5 / 3.0, 101.0 / 3.0, 87.125, 1.0};
    memcpy(c.h, h, sizeof h);
    c.cx = 639.5;
    c.cy = 511.5;
    c.radius = 0.5 * hypot(1280.0, 1024.0);
    c.k1 = -0.0812345678901234567;
    c.k2 = 0.0211111111111111;
    c.p1 = 1.0 / 3000.0;
    c.p2 = -4.9406564584124654e-324;
    c.rows = 7;
    c.cols = 9;
    c.pitch = 10.0;
    c.n_frames = 3;
    c.n_points = 63;
    c.rms_px = 0.1 / 3.0;
    c.worst_px = 0.0912;
    c.worst_frame = 2;
    c.worst_point = 62;
    c.coverage = 0.61;
    c.iterations = 37;
    for (int f = 0; f < 3; f++) {
        c.frame_rms_px[f] = 0.03 + f / 300.0;
        c.frame_angle_deg[f] = f ? -33.3333333333 * f : 0.0;
        c.frame_shift_mm[f][0] = f * 12.5 / 7.0;
        c.frame_shift_mm[f][1] = -f * 3.1;
    }
    strcpy(c.created, "2024-05-01T12:00:00Z");
    return c;
}

static void same(const mb_calib *a, const mb_calib *b)
{
    assert_int_equal(a->width, b->width);
    assert_int_equal(a->height, b->height);
    assert_memory_equal(a->h, b->h, sizeof a->h);
    const double va[] = {a->cx,     a->cy,       a->radius,  a->k1,
                         a->k2,     a->p1,       a->p2,      a->pitch,
                         a->rms_px, a->worst_px, a->coverage};
    const double vb[] = {b->cx,     b->cy,       b->radius,  b->k1,
                         b->k2,     b->p1,       b->p2,      b->pitch,
                         b->rms_px, b->worst_px, b->coverage};
    assert_memory_equal(va, vb, sizeof va);
    assert_int_equal(a->rows, b->rows);
    assert_int_equal(a->cols, b->cols);
    assert_int_equal(a->n_frames, b->n_frames);
    assert_int_equal(a->n_points, b->n_points);
    assert_int_equal(a->worst_frame, b->worst_frame);
    assert_int_equal(a->worst_point, b->worst_point);
    assert_int_equal(a->iterations, b->iterations);
    for (int f = 0; f < a->n_frames; f++) {
        assert_memory_equal(&a->frame_rms_px[f], &b->frame_rms_px[f],
                            sizeof(double));
        assert_memory_equal(&a->frame_angle_deg[f], &b->frame_angle_deg[f],
                            sizeof(double));
        assert_memory_equal(a->frame_shift_mm[f], b->frame_shift_mm[f],
                            2 * sizeof(double));
    }
    assert_string_equal(a->created, b->created);
}

static void test_round_trip(void **state)
{
    (void)state;
    mb_calib c = sample(), d;
    char *text = NULL, err[MB_ERR_LEN];
    size_t len = 0;
    assert_int_equal(mb_calib_file_print(&c, &text, &len, err), 0);
    assert_non_null(strstr(text, "\"modeband-calibration\""));
    assert_int_equal(mb_calib_file_parse(text, len, NAME, &d, err), 0);
    same(&c, &d);
    free(text);
    /* Through a file, and the frame-size check. */
    const char *path = "test_calib_file_tmp.json";
    assert_int_equal(mb_calib_file_save(path, &c, err), 0);
    assert_int_equal(mb_calib_file_load(path, &d, err), 0);
    same(&c, &d);
    assert_int_equal(mb_calib_file_load_for(path, 1280, 1024, &d, err), 0);
    assert_int_equal(mb_calib_file_load_for(path, 1280, 960, &d, err),
                     MB_ESIZE);
    assert_non_null(strstr(err, path));
    assert_non_null(strstr(err, "1280x1024"));
    assert_non_null(strstr(err, "1280x960"));
    assert_int_equal(d.width, 0);
    unlink(path);
    assert_int_equal(mb_calib_file_load("no_such_calibration.json", &d, err),
                     MB_ENOTFOUND);
    /* A model that does not validate is not written. */
    c.k1 = -0.9;
    assert_int_equal(mb_calib_file_print(&c, &text, &len, err), MB_ERANGE);
    c = sample();
    c.rms_px = NAN;
    assert_int_equal(mb_calib_file_print(&c, &text, &len, err), MB_ENUMERIC);
}

/* Print the sample, let edit() change the tree, parse the result. */
static int parse_edited(void (*edit)(cJSON *root), char *err)
{
    mb_calib c = sample(), d;
    char *text = NULL;
    size_t len = 0;
    assert_int_equal(mb_calib_file_print(&c, &text, &len, err), 0);
    cJSON *root = cJSON_Parse(text);
    free(text);
    assert_non_null(root);
    edit(root);
    char *s = cJSON_Print(root);
    cJSON_Delete(root);
    int rc = mb_calib_file_parse(s, strlen(s), NAME, &d, err);
    if (rc < 0)
        assert_int_equal(d.width, 0);
    printf("  %s\n", rc < 0 ? err : "(accepted)");
    cJSON_free(s);
    return rc;
}

static cJSON *at(cJSON *root, const char *a, const char *b)
{
    cJSON *o = cJSON_GetObjectItemCaseSensitive(root, a);
    return b ? cJSON_GetObjectItemCaseSensitive(o, b) : o;
}

static void e_format(cJSON *r)
{
    cJSON_ReplaceItemInObject(r, "format",
                              cJSON_CreateString("modeband-model"));
}
static void e_version(cJSON *r)
{
    cJSON_ReplaceItemInObject(r, "version", cJSON_CreateNumber(2));
}
static void e_no_model(cJSON *r)
{
    cJSON_DeleteItemFromObject(r, "model");
}
static void e_rows2(cJSON *r)
{
    cJSON_DeleteItemFromArray(at(r, "model", "plane_to_image"), 2);
}
static void e_row_short(cJSON *r)
{
    cJSON_DeleteItemFromArray(
        cJSON_GetArrayItem(at(r, "model", "plane_to_image"), 1), 0);
}
static void e_k1_null(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(at(r, "model", NULL), "distortion", NULL),
                              "k1", cJSON_CreateNull());
}
static void e_k2_huge(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(at(r, "model", NULL), "distortion", NULL),
                              "k2", cJSON_CreateRaw("1e999"));
}
static void e_k1_text(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(at(r, "model", NULL), "distortion", NULL),
                              "k1", cJSON_CreateString("-0.08"));
}
static void e_width(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(r, "frame", NULL), "width",
                              cJSON_CreateNumber(-5));
}
static void e_rms_len(cJSON *r)
{
    cJSON_AddItemToArray(at(r, "residuals", "frame_rms_px"),
                         cJSON_CreateNumber(0.1));
}
static void e_poses(cJSON *r)
{
    cJSON_DeleteItemFromArray(at(r, "poses", NULL), 0);
}
static void e_h33(cJSON *r)
{
    cJSON *row = cJSON_GetArrayItem(at(r, "model", "plane_to_image"), 2);
    cJSON_ReplaceItemInArray(row, 2, cJSON_CreateNumber(2.0));
}
static void e_fold(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(at(r, "model", NULL), "distortion", NULL),
                              "k1", cJSON_CreateNumber(-0.9));
}
static void e_radius(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(at(r, "model", NULL), "distortion", NULL),
                              "radius_px", cJSON_CreateNumber(0.0));
}
static void e_worst(cJSON *r)
{
    cJSON_ReplaceItemInObject(at(r, "residuals", NULL), "worst_frame",
                              cJSON_CreateNumber(3));
}
static void e_extra(cJSON *r)
{
    cJSON_AddStringToObject(r, "note", "a person's remark");
}

static void expect(void (*edit)(cJSON *), int code, const char *field)
{
    char err[MB_ERR_LEN];
    int rc = parse_edited(edit, err);
    assert_int_equal(rc, code);
    if (code < 0) {
        assert_non_null(strstr(err, NAME));
        if (field)
            assert_non_null(strstr(err, field));
    }
}

static void test_bad_documents(void **state)
{
    (void)state;
    expect(e_format, MB_EVERSION, "format");
    expect(e_version, MB_EVERSION, "version");
    expect(e_no_model, MB_EFORMAT, "model");
    expect(e_rows2, MB_ESIZE, "model.plane_to_image");
    expect(e_row_short, MB_ESIZE, "model.plane_to_image[1]");
    expect(e_k1_null, MB_ENUMERIC, "model.distortion.k1");
    expect(e_k2_huge, MB_ENUMERIC, "model.distortion.k2");
    expect(e_k1_text, MB_EFORMAT, "model.distortion.k1");
    expect(e_width, MB_EFORMAT, "frame.width");
    expect(e_rms_len, MB_ESIZE, "residuals.frame_rms_px");
    expect(e_poses, MB_ESIZE, "poses");
    expect(e_h33, MB_ERANGE, "plane_to_image[2][2]");
    expect(e_fold, MB_ERANGE, "fold");
    expect(e_radius, MB_ERANGE, "radius_px");
    expect(e_worst, MB_EFORMAT, "residuals.worst_frame");
    expect(e_extra, 0, NULL);
    /* Not JSON, truncated. */
    char err[MB_ERR_LEN];
    mb_calib d;
    const char *trunc = "{\"format\": \"modeband-calibration\", \"vers";
    assert_int_equal(mb_calib_file_parse(trunc, strlen(trunc), NAME, &d, err),
                     MB_EFORMAT);
    assert_non_null(strstr(err, NAME));
    assert_int_equal(mb_calib_file_parse("[]", 2, NAME, &d, err), MB_EFORMAT);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_bad_documents),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
