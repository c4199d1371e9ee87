/*
 * tests/io/test_points_file.c - point files, JSON and CSV: good files give
 * the expected layout and exact values; bad ones give the exact MB_E code
 * and a sentence naming the file and the field (JSON) or line (CSV).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "file_list.h"
#include "points_file.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define NAME "part.json"
#define CNAME "part.csv"

static char scratch[64];

static int setup_scratch(void **state)
{
    snprintf(scratch, sizeof scratch, "points_scratch_XXXXXX");
    return mkdtemp(scratch) ? 0 : -1;
}

static int teardown_scratch(void **state)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", scratch);
    return system(cmd) == 0 ? 0 : -1;
}

static void expect(const char *text, size_t len, int is_csv, int code,
                   const char *p1, const char *p2)
{
    const char *name = is_csv ? CNAME : NAME;
    char err[MB_ERR_LEN] = "";
    mb_layout l;
    double *xy = (double *)&l; /* must come back NULL */
    int rc = mb_points_parse(text, len, is_csv, name, &l, &xy, err);
    if (rc != code)
        fail_msg("%s: expected %d (%s), got %d: %s", is_csv ? "CSV" : "JSON",
                 code, mb_strerror(code), rc, err);
    assert_null(xy);
    if (strncmp(err, name, strlen(name)) != 0 || err[strlen(name)] != ':')
        fail_msg("sentence does not start with the file name: %s", err);
    if (p1 && !strstr(err, p1))
        fail_msg("sentence lacks \"%s\": %s", p1, err);
    if (p2 && !strstr(err, p2))
        fail_msg("sentence lacks \"%s\": %s", p2, err);
}

static void expect_json(const char *text, int code, const char *p1,
                        const char *p2)
{
    expect(text, strlen(text), 0, code, p1, p2);
}

static void expect_csv(const char *text, int code, const char *p1,
                       const char *p2)
{
    expect(text, strlen(text), 1, code, p1, p2);
}

/* ---- good files ---- */

static const double want_xy[] = {0,   0, 10, 0, 10, 5.5, 0,
                                 5.5, 2, 2,  3, 2,  2.5, 3};

static void check_square_and_hole(const mb_layout *l, const double *xy)
{
    assert_int_equal(l->n_outlines, 2);
    assert_int_equal(l->counts[0], 4);
    assert_int_equal(l->counts[1], 3);
    assert_int_equal(l->n_points, 7);
    for (int i = 0; i < 14; i++)
        assert_true(xy[i] == want_xy[i]);
}

static void test_json_good(void **state)
{
    const char *t = "{\"format\": \"modeband-points\", \"version\": 1,\n"
                    " \"part\": \"extra members are allowed\",\n"
                    " \"outlines\": [[[0, 0], [10, 0], [10, 5.5], [0, 5.5]],\n"
                    "              [[2, 2], [3e0, 2], [2.5, 3]]]}\n";
    mb_layout l;
    double *xy = NULL;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(mb_points_parse(t, strlen(t), 0, NAME, &l, &xy, err), 0);
    check_square_and_hole(&l, xy);
    free(xy);
}

static void test_csv_good(void **state)
{
    /* Header, comments, blank lines, CRLF, spaces, signs, exponents, no
       newline at the end. */
    const char *t = "# a square with a triangular hole\r\n"
                    "outline, x, y\r\n"
                    "\r\n"
                    "0,0,0\r\n"
                    "0, 10 ,-0\r\n"
                    "  0,1e1,5.5\n"
                    "0,+0,55e-1\n"
                    "   # the hole\n"
                    "1,2,2\n"
                    "1,3.,2.000\n"
                    "+1,2.5,.3e1";
    mb_layout l;
    double *xy = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_points_parse(t, strlen(t), 1, CNAME, &l, &xy, err);
    if (rc != 0)
        fail_msg("%s", err);
    check_square_and_hole(&l, xy);
    assert_true(signbit(xy[3])); /* "-0" stays negative zero */
    free(xy);
    /* Without a header. */
    const char *u = "0,0,0\n0,1,0\n0,1,1\n";
    assert_int_equal(mb_points_parse(u, strlen(u), 1, CNAME, &l, &xy, err), 0);
    assert_int_equal(l.n_outlines, 1);
    assert_int_equal(l.n_points, 3);
    free(xy);
}

static uint64_t rng = 0x853c49e6748fea9bull;

static double any_double(void)
{
    for (;;) {
        rng ^= rng >> 12;
        rng ^= rng << 25;
        rng ^= rng >> 27;
        uint64_t u = rng * 0x2545f4914f6cdd1dull;
        double v;
        memcpy(&v, &u, sizeof v);
        if (isfinite(v))
            return v;
    }
}

static void test_save_load_exact(void **state)
{
    mb_layout l;
    memset(&l, 0, sizeof l);
    l.n_outlines = 3;
    l.counts[0] = 50;
    l.counts[1] = 3;
    l.counts[2] = 17;
    l.n_points = 70;
    double xy[140];
    for (int i = 0; i < 140; i++)
        xy[i] = any_double();
    xy[0] = -0.0;
    xy[1] = 4.9406564584124654e-324;
    char path[128], err[MB_ERR_LEN] = "";
    snprintf(path, sizeof path, "%s/rt.json", scratch);
    assert_int_equal(mb_points_save(path, &l, xy, err), 0);
    mb_layout back;
    double *bxy = NULL;
    int rc = mb_points_load(path, &back, &bxy, err);
    if (rc != 0)
        fail_msg("%s", err);
    assert_memory_equal(&back, &l, sizeof l);
    assert_memory_equal(bxy, xy, sizeof xy);
    free(bxy);
    /* Refused on save: a non-finite value, a bad layout. */
    xy[7] = NAN;
    assert_int_equal(mb_points_save(path, &l, xy, err), MB_EINVAL);
    xy[7] = 1.0;
    l.counts[1] = 2;
    l.n_points = 69;
    assert_int_equal(mb_points_save(path, &l, xy, err), MB_EINVAL);
}

static void test_example_files(void **state)
{
    /* The bundled example point sets all read, with one layout. */
    static const char *const exts[] = {".json", ".csv"};
    mb_file_list files;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(mb_file_list_dir(MB_TEST_POINTS_DIR, exts, 2, &files, err),
                     0);
    assert_true(files.count >= 3);
    mb_layout first;
    for (int i = 0; i < files.count; i++) {
        mb_layout l;
        double *xy = NULL;
        int rc = mb_points_load(files.paths[i], &l, &xy, err);
        if (rc != 0)
            fail_msg("%s", err);
        if (i == 0)
            first = l;
        assert_memory_equal(&l, &first, sizeof l);
        for (int j = 0; j < 2 * l.n_points; j++)
            assert_true(isfinite(xy[j]));
        free(xy);
    }
    mb_file_list_free(&files);
}

static void test_load_errors(void **state)
{
    char path[128], err[MB_ERR_LEN] = "";
    mb_layout l;
    double *xy = NULL;
    snprintf(path, sizeof path, "%s/absent.json", scratch);
    assert_int_equal(mb_points_load(path, &l, &xy, err), MB_ENOTFOUND);
    assert_non_null(strstr(err, path));
    snprintf(path, sizeof path, "%s/points.txt", scratch);
    assert_int_equal(mb_points_load(path, &l, &xy, err), MB_EFORMAT);
    assert_non_null(strstr(err, ".json or *.csv"));
    snprintf(path, sizeof path, "%s/folder.csv", scratch);
    assert_int_equal(mkdir(path, 0755), 0);
    assert_int_equal(mb_points_load(path, &l, &xy, err), MB_EIO);
    assert_non_null(strstr(err, path));
    assert_null(xy);
}

/* ---- bad JSON ---- */

#define HDR "{\"format\": \"modeband-points\", \"version\": 1, "
#define TRI "[[0, 0], [1, 0], [1, 1]]"

static void test_json_bad(void **state)
{
    expect_json("", MB_EFORMAT, "empty", NULL);
    expect_json("  \n ", MB_EFORMAT, "empty", NULL);
    expect_json("garbage", MB_EFORMAT, "not valid JSON at line 1", NULL);
    expect_json(HDR "\"outlines\": [" TRI "]} x", MB_EFORMAT,
                "after the JSON document", NULL);
    expect_json("[" TRI "]", MB_EFORMAT, "expected a JSON object", NULL);
    expect_json("{\"version\": 1, \"outlines\": [" TRI "]}", MB_EFORMAT,
                "format: missing", NULL);
    expect_json("{\"format\": \"modeband-model\", \"version\": 1}", MB_EVERSION,
                "format", "modeband-points");
    expect_json("{\"format\": \"modeband-points\", \"version\": 2, "
                "\"outlines\": [" TRI "]}",
                MB_EVERSION, "found version 2", "only version 1");
    expect_json(HDR "\"points\": []}", MB_EFORMAT, "outlines: missing", NULL);
    expect_json(HDR "\"outlines\": {}}", MB_EFORMAT,
                "outlines: expected an array", NULL);
    expect_json(HDR "\"outlines\": []}", MB_EFORMAT, "outlines: expected 1",
                "found 0");
    expect_json(HDR "\"outlines\": [[]]}", MB_EFORMAT, "outlines[0]",
                "found 0");
    expect_json(HDR "\"outlines\": [5]}", MB_EFORMAT,
                "outlines[0]: expected an array of points", NULL);
    expect_json(HDR "\"outlines\": [[[0, 0], [1, 0]]]}", MB_EFORMAT,
                "outlines[0]: expected 3 to 8192 points", "found 2");
    expect_json(HDR "\"outlines\": [" TRI ", [[0, 0], [1, 0]]]}", MB_EFORMAT,
                "outlines[1]", "found 2");
    expect_json(HDR "\"outlines\": [[[0, 0], [1], [1, 1]]]}", MB_EFORMAT,
                "outlines[0][1]: expected a point [x, y]", NULL);
    expect_json(HDR "\"outlines\": [[[0, 0], [1, 0, 0], [1, 1]]]}", MB_EFORMAT,
                "outlines[0][1]", "array of 3 items");
    expect_json(HDR "\"outlines\": [[[0, 0], [null, 0], [1, 1]]]}", MB_ENUMERIC,
                "outlines[0][1][0]: expected a finite number", "found null");
    expect_json(HDR "\"outlines\": [[[0, 0], [1, 0], [1, 1e999]]]}",
                MB_ENUMERIC, "outlines[0][2][1]", "infinite");
    expect_json(HDR "\"outlines\": [[[0, 0], [1, 0], [1, -1e999]]]}",
                MB_ENUMERIC, "outlines[0][2][1]", NULL);
    expect_json(HDR "\"outlines\": [[[0, 0], [\"1\", 0], [1, 1]]]}", MB_EFORMAT,
                "outlines[0][1][0]", "a string");
    expect_json(HDR "\"outlines\": [[[0, 0], [NaN, 0], [1, 1]]]}", MB_EFORMAT,
                "not valid JSON", NULL);
    expect_json(HDR "\"outlines\": [[[0, 0], [Infinity, 0], [1, 1]]]}",
                MB_EFORMAT, "not valid JSON", NULL);
}

static void test_json_truncated(void **state)
{
    const char *t = HDR "\"outlines\": [" TRI ", " TRI "]}";
    size_t len = strlen(t);
    for (size_t cut = 0; cut < len; cut++) {
        char err[MB_ERR_LEN] = "";
        mb_layout l;
        double *xy = NULL;
        int rc = mb_points_parse(t, cut, 0, NAME, &l, &xy, err);
        if (rc != MB_EFORMAT)
            fail_msg("cut at %zu: got %d: %s", cut, rc, err);
        assert_null(xy);
    }
    expect(t, len - 1, 0, MB_EFORMAT, "ends early", NULL);
}

static void test_json_limits(void **state)
{
    /* 65 outlines; then one outline of 8193 points. */
    size_t cap = 65 * 40 + 200;
    char *t = malloc(cap);
    size_t n = (size_t)snprintf(t, cap, HDR "\"outlines\": [");
    for (int i = 0; i < 65; i++)
        n += (size_t)snprintf(t + n, cap - n, "%s" TRI, i ? ", " : "");
    snprintf(t + n, cap - n, "]}");
    expect_json(t, MB_EFORMAT, "expected 1 to 64 outlines", "found 65");
    free(t);
    cap = 8193 * 12 + 200;
    t = malloc(cap);
    n = (size_t)snprintf(t, cap, HDR "\"outlines\": [[");
    for (int i = 0; i < 8193; i++)
        n += (size_t)snprintf(t + n, cap - n, "%s[%d, 1]", i ? ", " : "", i);
    snprintf(t + n, cap - n, "]]}");
    expect_json(t, MB_EFORMAT, "outlines[0]: expected 3 to 8192 points",
                "found 8193");
    free(t);
}

/* ---- bad CSV ---- */

static void test_csv_bad(void **state)
{
    expect_csv("", MB_EFORMAT, "no points found", NULL);
    expect_csv("# only a comment\n\n", MB_EFORMAT, "no points found", NULL);
    expect_csv("outline,x,y\n", MB_EFORMAT, "no points found", NULL);
    expect_csv("0,0,0\n0,1,0\n0,1,nan\n", MB_ENUMERIC, "line 3: y",
               "finite number, found 'nan'");
    expect_csv("0,0,0\n0,inf,0\n0,1,1\n", MB_ENUMERIC, "line 2: x", "'inf'");
    expect_csv("0,0,0\n0,1,0\n0,-Infinity,1\n", MB_ENUMERIC, "line 3: x", NULL);
    expect_csv("0,0,0\n0,1e999,0\n0,1,1\n", MB_ENUMERIC, "line 2: x",
               "out of range");
    expect_csv("0,0,0\n0,abc,0\n0,1,1\n", MB_EFORMAT, "line 2: x",
               "expected a decimal number, found 'abc'");
    expect_csv("0,0,0\n0,0x10,0\n0,1,1\n", MB_EFORMAT, "line 2: x", "0x10");
    expect_csv("0,0,0\n0,1\n0,1,1\n", MB_EFORMAT, "line 2",
               "expected 3 fields");
    expect_csv("0,0,0\n0,1,0,4\n", MB_EFORMAT, "line 2", "found 4");
    expect_csv("0,0,0\n0,1,\n", MB_EFORMAT, "line 2: y", "found nothing");
    expect_csv("0,0,0\n0,1,0\n0,1.5,", MB_EFORMAT, "line 3: y", NULL);
    expect_csv("0,0,0\n0,1,0\n0,1,1\n1,0,0\n1,1,0\n1,1,1\n0,5,5\n", MB_EFORMAT,
               "line 7: outline", "found 0");
    expect_csv("0,0,0\n0,1,0\n0,1,1\n2,0,0\n", MB_EFORMAT, "line 4: outline",
               "found 2");
    expect_csv("1,0,0\n1,1,0\n1,1,1\n", MB_EFORMAT, "line 1: outline",
               "expected 0");
    expect_csv("0,0,0\n0,1,0\n1,0,0\n1,1,0\n1,1,1\n", MB_EFORMAT,
               "line 2: outline 0 has 2 points", "at least 3");
    expect_csv("0,0,0\n0,1,0\n0,1,1\n1,0,0\n", MB_EFORMAT,
               "line 4: outline 1 has 1 point;", NULL);
    expect_csv("0,0,0\n0,1,0\n0,1,1\n64,0,0\n", MB_EFORMAT, "line 4: outline",
               "0 to 63, found '64'");
    expect_csv("-1,0,0\n", MB_EFORMAT, "line 1: outline", "'-1'");
    expect_csv("0.5,0,0\n", MB_EFORMAT, "line 1: outline", "'0.5'");
    expect_csv("x,y\n", MB_EFORMAT, "line 1", "3 fields");
    /* Bytes that are not text. */
    const char nul[] = "0,0,0\n0,1\0,0\n0,1,1\n";
    expect(nul, sizeof nul - 1, 1, MB_EFORMAT, "line 2", "NUL");
    const char bin[] = "\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR";
    expect(bin, sizeof bin - 1, 1, MB_EFORMAT, "line 1", NULL);
}

static void test_csv_limits(void **state)
{
    size_t cap = 8193 * 16 + 64;
    char *t = malloc(cap);
    size_t n = 0;
    for (int i = 0; i < 8193; i++)
        n += (size_t)snprintf(t + n, cap - n, "0,%d,1\n", i);
    expect_csv(t, MB_EFORMAT, "line 8193: outline 0 has more than 8192", NULL);
    /* 8192 is allowed. */
    mb_layout l;
    double *xy = NULL;
    char err[MB_ERR_LEN];
    size_t len8192 = n - strlen("0,8192,1\n");
    assert_int_equal(mb_points_parse(t, len8192, 1, CNAME, &l, &xy, err), 0);
    assert_int_equal(l.n_points, 8192);
    assert_true(xy[2 * 8191] == 8191.0);
    free(xy);
    free(t);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_json_good),
        cmocka_unit_test(test_csv_good),
        cmocka_unit_test(test_save_load_exact),
        cmocka_unit_test(test_example_files),
        cmocka_unit_test(test_load_errors),
        cmocka_unit_test(test_json_bad),
        cmocka_unit_test(test_json_truncated),
        cmocka_unit_test(test_json_limits),
        cmocka_unit_test(test_csv_bad),
        cmocka_unit_test(test_csv_limits),
    };
    return cmocka_run_group_tests(tests, setup_scratch, teardown_scratch);
}
