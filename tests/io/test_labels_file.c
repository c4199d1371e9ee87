/*
 * tests/io/test_labels_file.c - ground-truth labels (JSON Lines): every
 * field of generated truths survives the round trip (to the 1e-4 px the
 * file keeps), and bad lines are refused with the file, line and field.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "image.h"
#include "labels_file.h"
#include "synth.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static char scratch[64];

static int setup_scratch(void **state)
{
    (void)state;
    snprintf(scratch, sizeof scratch, "labels_scratch_XXXXXX");
    return mkdtemp(scratch) ? 0 : -1;
}

static int teardown_scratch(void **state)
{
    (void)state;
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", scratch);
    return system(cmd) == 0 ? 0 : -1;
}

static const char *spath(const char *name)
{
    static char buf[256];
    snprintf(buf, sizeof buf, "%s/%s", scratch, name);
    return buf;
}

#define N 14

static void test_round_trip(void **state)
{
    (void)state;
    mb_synth_config c;
    mb_synth_config_default(&c, MB_SYNTH_FLANGE);
    c.width = 640;
    c.height = 512;
    c.defect_rate = 0.7;
    c.defect_mask |= 1u << MB_SYNTH_CUT;
    c.lighting = MB_SYNTH_FRONTLIT;
    c.seed = 0xFEDCBA9876543210ull; /* above 2^53: kept as a string */
    char err[MB_ERR_LEN] = "";
    mb_synth *g = NULL;
    assert_int_equal(mb_synth_open(&c, &g, err), 0);
    mb_image im;
    assert_int_equal(mb_image_alloc(c.width, c.height, &im), 0);
    mb_labels_writer *w = NULL;
    assert_int_equal(mb_labels_writer_open(spath("labels.jsonl"), &w, err), 0);
    static mb_synth_truth truths[N];
    static double *xy[N];
    int types = 0;
    for (int i = 0; i < N; i++) {
        assert_int_equal(mb_synth_make(g, (uint64_t)(1000 + i), i % 3,
                                       MB_SYNTH_DRAW, &im, &truths[i]),
                         0);
        int n = 0;
        for (int k = 0; k < truths[i].outlines.n_outlines; k++)
            n += truths[i].outlines.counts[k];
        xy[i] = malloc(sizeof(double) * 2 * (size_t)(n + 1));
        assert_non_null(xy[i]);
        memcpy(xy[i], truths[i].outlines.xy, sizeof(double) * 2 * (size_t)n);
        types |= 1 << truths[i].defect.type;
        char name[32];
        snprintf(name, sizeof name, "flange_%04d.pgm", i + 1);
        assert_int_equal(mb_labels_write(w, name, &truths[i], err), 0);
    }
    assert_true(types & 1);  /* a good part among them */
    assert_true(types & ~1); /* and defects */
    assert_int_equal(mb_labels_writer_close(w, err), 0);

    mb_labels_reader *r = NULL;
    assert_int_equal(mb_labels_reader_open(spath("labels.jsonl"), &r, err), 0);
    for (int i = 0; i < N; i++) {
        mb_label l;
        int rc = mb_labels_read(r, &l, err);
        if (rc != 1)
            fail_msg("record %d: %d %s", i, rc, err);
        const mb_synth_truth *a = &truths[i], *b = &l.truth;
        char name[32];
        snprintf(name, sizeof name, "flange_%04d.pgm", i + 1);
        assert_string_equal(l.image, name);
        assert_int_equal(l.line, i + 1);
        assert_int_equal(b->family, a->family);
        assert_string_equal(b->part_number, "FG-3426");
        assert_true(b->seed == a->seed);
        assert_true(b->index == a->index);
        assert_int_equal(b->shot, a->shot);
        assert_int_equal(b->width, a->width);
        assert_int_equal(b->height, a->height);
        assert_true(b->mm_per_px == a->mm_per_px);
        assert_int_equal(b->lighting, a->lighting);
        assert_true(b->noise_sigma == a->noise_sigma &&
                    b->blur_sigma == a->blur_sigma);
        assert_true(b->grey_part == a->grey_part &&
                    b->grey_background == a->grey_background);
        assert_int_equal(b->present, a->present);
        assert_int_equal(b->in_view, a->in_view);
        assert_int_equal(b->good, a->good);
        assert_true(fabs(b->pose.tx - a->pose.tx) <= 0.5e-4 + 1e-9);
        assert_true(fabs(b->pose.ty - a->pose.ty) <= 0.5e-4 + 1e-9);
        assert_true(fabs(b->pose.angle - a->pose.angle) < 1e-7);
        assert_true(fabs(b->pose.scale - a->pose.scale) < 1e-9);
        assert_true(fabs(b->size - a->size) < 1e-7);
        assert_int_equal(b->defect.type, a->defect.type);
        assert_true(fabs(b->defect.size_mm - a->defect.size_mm) <=
                    0.5e-5 + 1e-9);
        assert_true(fabs(b->defect.extent_mm - a->defect.extent_mm) <=
                    0.5e-5 + 1e-9);
        assert_int_equal(b->defect.outline, a->defect.outline);
        assert_true(fabs(b->defect.arc - a->defect.arc) <= 0.5e-6 + 1e-9);
        assert_true(fabs(remainder(b->defect.angle - a->defect.angle,
                                   2 * M_PI)) < 1e-5);
        assert_true(fabs(b->defect.x - a->defect.x) <= 0.5e-4 + 1e-9);
        assert_true(fabs(b->defect.y - a->defect.y) <= 0.5e-4 + 1e-9);
        assert_int_equal(b->outlines.n_outlines, a->outlines.n_outlines);
        int n = 0;
        for (int k = 0; k < a->outlines.n_outlines; k++) {
            assert_int_equal(b->outlines.counts[k], a->outlines.counts[k]);
            n += a->outlines.counts[k];
        }
        for (int p = 0; p < 2 * n; p++)
            if (fabs(b->outlines.xy[p] - xy[i][p]) > 0.5e-4 + 1e-9)
                fail_msg("record %d coordinate %d: %.6f read, %.6f written", i,
                         p, b->outlines.xy[p], xy[i][p]);
        free(xy[i]);
    }
    mb_label l;
    assert_int_equal(mb_labels_read(r, &l, err), 0);
    assert_int_equal(mb_labels_read(r, &l, err), 0);
    mb_labels_reader_close(r);
    mb_labels_reader_close(NULL);
    assert_int_equal(mb_labels_writer_close(NULL, err), 0);
    mb_image_free(&im);
    mb_synth_close(g);
}

/* A small valid record (one triangle), as text, with one member replaced. */
static const char *valid =
    "{\"format\":\"modeband-labels\",\"version\":1,\"image\":\"a.pgm\","
    "\"family\":\"ring\",\"part\":\"RG-4030\",\"seed\":\"7\",\"index\":3,"
    "\"shot\":0,\"width\":64,\"height\":48,\"mm_per_px\":0.1,"
    "\"lighting\":\"back\",\"noise\":2,\"blur\":1,"
    "\"grey\":{\"part\":22,\"background\":215},\"present\":true,"
    "\"in_view\":true,\"good\":true,"
    "\"pose\":{\"x\":30,\"y\":20,\"angle_deg\":90,\"size\":1},"
    "\"defect\":{\"type\":\"none\",\"size_mm\":0,\"extent_mm\":0,"
    "\"outline\":-1,\"arc\":-1,\"angle_deg\":0,\"x\":0,\"y\":0},"
    "\"outlines\":[[[10,10],[20,10],[15,18]]]}";

static char *replaced(const char *from, const char *to)
{
    static char buf[2048];
    const char *p = strstr(valid, from);
    assert_non_null(p);
    snprintf(buf, sizeof buf, "%.*s%s%s", (int)(p - valid), valid, to,
             p + strlen(from));
    return buf;
}

static void expect_read(const char *text, int n_good, int code, const char *p1,
                        const char *p2)
{
    FILE *f = fopen(spath("bad.jsonl"), "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
    char err[MB_ERR_LEN] = "";
    mb_labels_reader *r = NULL;
    assert_int_equal(mb_labels_reader_open(spath("bad.jsonl"), &r, err), 0);
    mb_label l;
    for (int i = 0; i < n_good; i++)
        assert_int_equal(mb_labels_read(r, &l, err), 1);
    int rc = mb_labels_read(r, &l, err);
    if (rc != code)
        fail_msg("expected %d (%s), got %d: %s", code, mb_strerror(code), rc,
                 err);
    if (!strstr(err, "bad.jsonl line "))
        fail_msg("sentence does not name the file and line: %s", err);
    if (p1 && !strstr(err, p1))
        fail_msg("sentence lacks \"%s\": %s", p1, err);
    if (p2 && !strstr(err, p2))
        fail_msg("sentence lacks \"%s\": %s", p2, err);
    mb_labels_reader_close(r);
}

static void test_bad_lines(void **state)
{
    (void)state;
    char text[4096];
    /* blank lines are skipped; the record's values come through */
    snprintf(text, sizeof text, "\n%s\n\n", valid);
    FILE *f = fopen(spath("ok.jsonl"), "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
    char err[MB_ERR_LEN];
    mb_labels_reader *r = NULL;
    assert_int_equal(mb_labels_reader_open(spath("ok.jsonl"), &r, err), 0);
    mb_label l;
    assert_int_equal(mb_labels_read(r, &l, err), 1);
    assert_int_equal(l.line, 2);
    assert_true(fabs(l.truth.pose.angle - M_PI / 2) < 1e-12);
    assert_true(fabs(l.truth.pose.scale - 10) < 1e-12);
    assert_int_equal(l.truth.outlines.counts[0], 3);
    assert_true(l.truth.outlines.xy[5] == 18);
    assert_int_equal(mb_labels_read(r, &l, err), 0);
    mb_labels_reader_close(r);

    /* a torn last line, as a crash while writing leaves it */
    snprintf(text, sizeof text, "%s\n%.100s", valid, valid);
    expect_read(text, 1, MB_EFORMAT, "line 2", NULL);
    expect_read(replaced("\"version\":1", "\"version\":2"), 0, MB_EVERSION, "2",
                NULL);
    expect_read(replaced("\"family\":\"ring\"", "\"family\":\"donut\""), 0,
                MB_EFORMAT, "family", "donut");
    expect_read(replaced("\"pose\":", "\"posture\":"), 0, MB_EFORMAT, "pose",
                NULL);
    expect_read(replaced("[15,18]", "[15,18,3]"), 0, MB_ESIZE, "outlines[0][2]",
                NULL);
    expect_read(replaced(",[15,18]", ""), 0, MB_EFORMAT, "outlines[0]",
                "2 points");
    expect_read(replaced("\"seed\":\"7\"", "\"seed\":\"-7\""), 0, MB_EFORMAT,
                "seed", NULL);
    expect_read(replaced("\"seed\":\"7\"", "\"seed\":7"), 0, MB_EFORMAT, "seed",
                NULL);
    expect_read(replaced("\"type\":\"none\"", "\"type\":\"dent\""), 0,
                MB_EFORMAT, "defect.type", NULL);
    expect_read(replaced("\"x\":30", "\"x\":null"), 0, MB_ENUMERIC, "pose.x",
                NULL);
    expect_read("[1,2,3]\n", 0, MB_EFORMAT, "one JSON object", NULL);

    assert_int_equal(mb_labels_reader_open(spath("none.jsonl"), &r, err),
                     MB_ENOTFOUND);
    assert_non_null(strstr(err, "none.jsonl"));
    mb_labels_writer *w = NULL;
    assert_int_equal(mb_labels_writer_open(spath("no/dir/l.jsonl"), &w, err),
                     MB_EIO);
    assert_non_null(strstr(err, "l.jsonl"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_bad_lines),
    };
    return cmocka_run_group_tests(tests, setup_scratch, teardown_scratch);
}
