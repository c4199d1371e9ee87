/*
 * tests/capture/test_replay_source.c - replay of image files as a frame
 * source (inspect/replay_source.h): folder order, list order, looping and
 * the end of a recording, the frame rate and the timeout, preload against
 * decoding per frame, damaged and missing files, images of several sizes.
 * The files are written by the test into its scratch folder (argv[1]).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "image_file.h"
#include "replay_source.h"
#include "source.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static char g_dir[900];   /* five frames, f00 .. f04, plus a text file */
static char g_mixed[900]; /* frames of two sizes */
static char g_empty[900]; /* no image */
static char g_paths[5][1000];

/* Frame i: width 40 + i (so each file is recognisable by its size too),
   pixel (x, y) = 10 * i + (x + y) % 7. */
static uint8_t value(int i, int x, int y)
{
    return (uint8_t)(10 * i + (x + y) % 7);
}

static void write_frame(const char *path, int i, int w, int h)
{
    mb_image im;
    assert_int_equal(mb_image_alloc(w, h, &im), 0);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            im.pixels[(size_t)y * (size_t)im.stride + (size_t)x] =
                value(i, x, y);
    char err[MB_ERR_LEN];
    int rc = mb_image_save(path, &im, err);
    if (rc < 0)
        fail_msg("%s", err);
    mb_image_free(&im);
}

/* Which file a frame came from (-1: none matches), checking every pixel. */
static int which(const mb_frame *f)
{
    int i = f->view.width - 40;
    if (i < 0 || i > 4 || f->view.height != 30)
        return -1;
    for (int y = 0; y < f->view.height; y++)
        for (int x = 0; x < f->view.width; x++)
            if (f->view.pixels[(size_t)y * (size_t)f->view.stride +
                               (size_t)x] != value(i, x, y))
                return -1;
    return i;
}

static int setup(void **state)
{
    (void)state;
    char p[1000];
    mkdir(g_dir, 0755);
    mkdir(g_mixed, 0755);
    mkdir(g_empty, 0755);
    /* written out of order, PGM and PNG mixed: the folder order is the
       name order */
    static const int order[5] = {3, 0, 4, 1, 2};
    for (int k = 0; k < 5; k++) {
        int i = order[k];
        snprintf(g_paths[i], sizeof g_paths[i], "%s/f%02d.%s", g_dir, i,
                 i % 2 ? "png" : "pgm");
        write_frame(g_paths[i], i, 40 + i, 30);
    }
    snprintf(p, sizeof p, "%s/notes.txt", g_dir);
    FILE *fp = fopen(p, "w");
    if (fp) {
        fputs("not an image\n", fp);
        fclose(fp);
    }
    snprintf(p, sizeof p, "%s/a.pgm", g_mixed);
    write_frame(p, 0, 64, 48);
    snprintf(p, sizeof p, "%s/b.pgm", g_mixed);
    write_frame(p, 1, 20, 10);
    return 0;
}

static mb_source *open_cfg(const mb_replay_config *c)
{
    mb_source *src = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_replay_open(c, &src, err);
    if (rc < 0)
        fail_msg("mb_replay_open: %s", err);
    return src;
}

static void next_ok(mb_source *src, mb_frame *f)
{
    char err[MB_ERR_LEN] = "";
    int rc = mb_source_next(src, 2000, f, err);
    if (rc < 0)
        fail_msg("mb_source_next: %s (%s)", err, mb_strerror(rc));
}

static void test_folder_in_name_order(void **state)
{
    (void)state;
    for (int preload = 1; preload >= 0; preload--) {
        mb_replay_config c;
        mb_replay_config_default(&c);
        c.dir = g_dir;
        c.preload = preload;
        mb_source *src = open_cfg(&c);
        assert_int_equal(mb_replay_count(src), 5); /* notes.txt skipped */
        assert_null(mb_replay_current_file(src));
        for (int k = 0; k < 5; k++) {
            mb_frame f;
            next_ok(src, &f);
            assert_int_equal(f.seq, (uint64_t)k);
            assert_int_equal(which(&f), k);
            assert_string_equal(mb_replay_current_file(src), g_paths[k]);
        }
        mb_frame f;
        char err[MB_ERR_LEN] = "";
        assert_int_equal(mb_source_next(src, 100, &f, err), MB_ENOTFOUND);
        assert_non_null(strstr(err, "5 files"));
        mb_source_stats s = mb_source_get_stats(src);
        assert_int_equal(s.frames, 5);
        assert_int_equal(s.dropped, 0);
        assert_string_equal(mb_source_name(src), "replay");
        mb_source_close(src);
    }
}

static void test_list_order_and_loop(void **state)
{
    (void)state;
    const char *files[3] = {g_paths[4], g_paths[0], g_paths[2]};
    mb_replay_config c;
    mb_replay_config_default(&c);
    c.files = files;
    c.n_files = 3;
    c.loop = 1;
    mb_source *src = open_cfg(&c);
    static const int expect[3] = {4, 0, 2};
    for (int k = 0; k < 10; k++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.seq, (uint64_t)k);
        assert_int_equal(which(&f), expect[k % 3]);
    }
    mb_source_close(src);
}

static void test_rate_and_timeout(void **state)
{
    (void)state;
    mb_replay_config c;
    mb_replay_config_default(&c);
    c.dir = g_dir;
    c.fps = 50;
    c.loop = 1;
    mb_source *src = open_cfg(&c);
    mb_frame f;
    int64_t t0 = mb_source_clock_ns(), first = 0;
    for (int k = 0; k < 6; k++) {
        next_ok(src, &f);
        if (k == 0)
            first = f.t_ns;
        assert_true(llabs(f.t_ns - first - (int64_t)k * 20000000) < 2);
        assert_true(mb_source_clock_ns() >= f.t_ns);
    }
    double ms = (double)(mb_source_clock_ns() - t0) / 1e6;
    assert_true(ms >= 99.0 && ms < 400.0);
    mb_source_close(src);

    c.fps = 4; /* 250 ms per frame */
    src = open_cfg(&c);
    next_ok(src, &f);
    char err[MB_ERR_LEN] = "";
    t0 = mb_source_clock_ns();
    assert_int_equal(mb_source_next(src, 40, &f, err), MB_ETIMEOUT);
    ms = (double)(mb_source_clock_ns() - t0) / 1e6;
    assert_true(ms >= 39.0 && ms < 250.0);
    next_ok(src, &f);
    assert_int_equal(which(&f), 1);
    assert_int_equal(mb_source_get_stats(src).timeouts, 1);
    mb_source_close(src);

    /* as fast as asked: 100 frames well under a second */
    c.fps = 0;
    src = open_cfg(&c);
    t0 = mb_source_clock_ns();
    for (int k = 0; k < 100; k++)
        next_ok(src, &f);
    assert_true(mb_source_clock_ns() - t0 < 1000000000);
    assert_int_equal(which(&f), 99 % 5);
    mb_source_close(src);
}

static void test_sizes_may_differ(void **state)
{
    (void)state;
    mb_replay_config c;
    mb_replay_config_default(&c);
    c.dir = g_mixed;
    mb_source *src = open_cfg(&c);
    mb_frame f;
    next_ok(src, &f);
    assert_int_equal(f.view.width, 64);
    assert_int_equal(f.view.height, 48);
    next_ok(src, &f);
    assert_int_equal(f.view.width, 20);
    assert_int_equal(f.view.height, 10);
    assert_int_equal(f.view.pixels[(size_t)9 * (size_t)f.view.stride + 19],
                     value(1, 19, 9));
    mb_source_close(src);
}

static void test_damaged_and_missing_files(void **state)
{
    (void)state;
    char bad[1000], err[MB_ERR_LEN] = "";
    snprintf(bad, sizeof bad, "%s/damaged.pgm", g_empty);
    FILE *fp = fopen(bad, "w");
    assert_non_null(fp);
    fputs("P5\n40 30\n255\nshort", fp); /* truncated pixel data */
    fclose(fp);
    const char *files[3] = {g_paths[1], bad, g_paths[3]};
    mb_replay_config c;
    mb_replay_config_default(&c);
    c.files = files;
    c.n_files = 3;
    mb_source *src = NULL;
    /* preloaded: refused at open, naming the file */
    assert_int_equal(mb_replay_open(&c, &src, err), MB_EFORMAT);
    assert_null(src);
    assert_non_null(strstr(err, "damaged.pgm"));
    /* decoded per frame: that frame fails, the replay goes on */
    c.preload = 0;
    src = open_cfg(&c);
    mb_frame f;
    next_ok(src, &f);
    assert_int_equal(which(&f), 1);
    assert_int_equal(mb_source_next(src, 100, &f, err), MB_EIO);
    assert_non_null(strstr(err, "damaged.pgm"));
    next_ok(src, &f);
    assert_int_equal(which(&f), 3);
    assert_int_equal(f.seq, 2);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.faults, 1);
    assert_int_equal(s.frames, 2);
    assert_int_equal(s.dropped, 1); /* frame 1 never reached the caller */
    mb_source_close(src);
    unlink(bad);

    /* the folder now holds no image */
    mb_replay_config_default(&c);
    c.dir = g_empty;
    assert_int_equal(mb_replay_open(&c, &src, err), MB_ENOTFOUND);
    assert_non_null(strstr(err, "no .pgm or .png"));
    char missing[1000];
    snprintf(missing, sizeof missing, "%s/nowhere", g_empty);
    c.dir = missing;
    assert_int_equal(mb_replay_open(&c, &src, err), MB_ENOTFOUND);
    const char *one[1] = {missing};
    mb_replay_config_default(&c);
    c.files = one;
    c.n_files = 1;
    assert_int_equal(mb_replay_open(&c, &src, err), MB_ENOTFOUND);
    assert_non_null(strstr(err, "nowhere"));
    mb_replay_config_default(&c);
    assert_int_equal(mb_replay_open(&c, &src, err), MB_EINVAL);
    /* the preload cap */
    c.dir = g_dir;
    c.preload_max_mb = 0;
    assert_int_equal(mb_replay_open(&c, &src, err), MB_EINVAL);
    assert_null(mb_replay_current_file(NULL));
}

int main(int argc, char **argv)
{
    const char *scratch = argc > 1 ? argv[1] : "test_replay_scratch";
    mkdir(scratch, 0755);
    snprintf(g_dir, sizeof g_dir, "%.800s/frames", scratch);
    snprintf(g_mixed, sizeof g_mixed, "%.800s/mixed", scratch);
    snprintf(g_empty, sizeof g_empty, "%.800s/empty", scratch);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_folder_in_name_order),
        cmocka_unit_test(test_list_order_and_loop),
        cmocka_unit_test(test_rate_and_timeout),
        cmocka_unit_test(test_sizes_may_differ),
        cmocka_unit_test(test_damaged_and_missing_files),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
