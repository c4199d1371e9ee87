/*
 * tests/capture/test_v4l2.c - the V4L2 source through the real libv4l2 and
 * libv4lconvert, against the emulated camera (v4l2_emu/): format
 * negotiation (GREY straight from the buffers, YUYV luma, YU12 converted
 * by libv4lconvert from UYVY), the picture against the camera's known
 * pattern, sequence numbers and timestamps, dropped frames (an injected
 * gap, and a slow caller), a stalled camera and the timeout, short frames,
 * unplug and reopen, exposure and gain controls, refused configurations.
 *
 * The camera is a memfd named "modeband-emucam" reached through a
 * by-id-style symbolic link in the scratch folder (argv[1]); libv4l2 finds
 * the plugin through the glob() redirect linked into this program
 * (v4l2_emu/plugin_dir.c), so nothing outside the build is touched.
 * LIBV4LCONTROL_CONTROLS=0 keeps libv4lcontrol from creating its
 * shared-memory segment in /dev/shm for the fake controls it would add.
 */
#define _GNU_SOURCE
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "emucam.h"
#include "error.h"
#include "source.h"
#include "v4l2.h"

#include <errno.h>
#include <linux/videodev2.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#define W 328 /* not a multiple of 64: the camera pads its rows */
#define H 240

static const char *g_scratch;
static char g_link[1024]; /* the by-id style path the source opens */
static char g_log[1024];  /* the camera's log */
static int g_memfd = -1;

static const char *const env_names[] = {
    "MB_EMUCAM_FORMATS",      "MB_EMUCAM_FPS",      "MB_EMUCAM_BPL_ALIGN",
    "MB_EMUCAM_UNPLUG_AFTER", "MB_EMUCAM_STALL_AT", "MB_EMUCAM_STALL_MS",
    "MB_EMUCAM_SHORT_AT",     "MB_EMUCAM_GAP_AT",   "MB_EMUCAM_GAP",
    "MB_EMUCAM_NO_CONTROLS",  "MB_EMUCAM_LOG"};

static void plug(void)
{
    char target[64];
    snprintf(target, sizeof target, "/proc/self/fd/%d", g_memfd);
    unlink(g_link);
    if (symlink(target, g_link) != 0)
        fail_msg("symlink %s: %s", g_link, strerror(errno));
}

static void unplug(void)
{
    unlink(g_link);
}

static int setup(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof env_names / sizeof env_names[0]; i++)
        unsetenv(env_names[i]);
    g_memfd = memfd_create(EMUCAM_NAME, MFD_CLOEXEC);
    if (g_memfd < 0)
        return -1;
    char dir[900];
    snprintf(dir, sizeof dir, "%.800s/by-id", g_scratch);
    mkdir(g_scratch, 0755);
    mkdir(dir, 0755);
    snprintf(g_link, sizeof g_link, "%s/usb-modeband_emucam-video-index0", dir);
    snprintf(g_log, sizeof g_log, "%.900s/emucam.log", g_scratch);
    unlink(g_log);
    setenv("MB_EMUCAM_LOG", g_log, 1);
    plug();
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unplug();
    if (g_memfd >= 0)
        close(g_memfd);
    g_memfd = -1;
    return 0;
}

static mb_source *open_cam(int w, int h, int exposure_us, int gain)
{
    mb_v4l2_config c;
    mb_v4l2_config_default(&c);
    c.path = g_link;
    c.width = w;
    c.height = h;
    c.exposure_us = exposure_us;
    c.gain = gain;
    mb_source *src = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_v4l2_open(&c, &src, err);
    if (rc < 0)
        fail_msg("mb_v4l2_open: %s (%s)", err, mb_strerror(rc));
    return src;
}

static int try_open(int w, int h, int exposure_us, int gain, char *err)
{
    mb_v4l2_config c;
    mb_v4l2_config_default(&c);
    c.path = g_link;
    c.width = w;
    c.height = h;
    c.exposure_us = exposure_us;
    c.gain = gain;
    mb_source *src = NULL;
    int rc = mb_v4l2_open(&c, &src, err);
    mb_source_close(src);
    return rc;
}

static void next_ok(mb_source *src, mb_frame *f)
{
    char err[MB_ERR_LEN] = "";
    int rc = mb_source_next(src, 2000, f, err);
    if (rc < 0)
        fail_msg("mb_source_next: %s (%s)", err, mb_strerror(rc));
}

/* Pixels of the frame that differ from the camera's pattern for its
   sequence number seq_cam. */
static long mismatches(const mb_frame *f, uint32_t seq_cam)
{
    long bad = 0;
    for (int y = 0; y < f->view.height; y++)
        for (int x = 0; x < f->view.width; x++)
            if (f->view.pixels[(size_t)y * (size_t)f->view.stride +
                               (size_t)x] != emucam_luma(x, y, seq_cam))
                bad++;
    return bad;
}

/* Whether the camera's log holds a line starting with `line`; its line
   number (1-based) or 0. */
static int log_line(const char *line)
{
    FILE *f = fopen(g_log, "r");
    if (!f)
        return 0;
    char buf[256];
    int n = 0, found = 0;
    while (!found && fgets(buf, sizeof buf, f)) {
        n++;
        if (!strncmp(buf, line, strlen(line)))
            found = n;
    }
    fclose(f);
    return found;
}

/* ---- negotiation */

static void test_grey_is_chosen_and_used_in_place(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_FORMATS", "YUYV,GREY", 1); /* GREY not listed first */
    mb_source *src = open_cam(W, H, 0, -1);
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.fourcc, V4L2_PIX_FMT_GREY);
    assert_int_equal(info.emulated, 0);
    assert_int_equal(info.width, W);
    assert_int_equal(info.height, H);
    assert_int_equal(info.stride, 384); /* 328 rounded up to 64 bytes */
    assert_true(info.buffers >= 4);
    assert_string_equal(info.driver, "mb-emucam");
    assert_true(log_line("S_FMT GREY 328x240 bpl 384") > 0);
    assert_int_equal(log_line("REQBUFS 4"), log_line("REQBUFS"));
    for (int i = 0; i < 6; i++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.view.width, W);
        assert_int_equal(f.view.height, H);
        assert_int_equal(f.view.stride, 384);
        assert_int_equal(f.seq, (uint64_t)i);
        assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
    }
    /* the wrong sequence number must not match: the check can fail */
    mb_frame f;
    next_ok(src, &f);
    assert_true(mismatches(&f, (uint32_t)f.seq + 1) > W * H / 2);
    mb_source_close(src);
}

static void test_yuyv_luma(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_FORMATS", "YUYV", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.fourcc, V4L2_PIX_FMT_YUYV);
    assert_int_equal(info.emulated, 0);
    assert_true(log_line("S_FMT YUYV 328x240 bpl 704") > 0);
    for (int i = 0; i < 5; i++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.view.width, W);
        assert_int_equal(f.view.stride, info.stride);
        assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
    }
    mb_source_close(src);
}

static void test_yu12_converted_by_libv4lconvert(void **state)
{
    (void)state;
    /* UYVY is neither GREY nor YUYV: the source must ask libv4l2 for YU12,
       which libv4lconvert makes from UYVY; its first plane is the luma. */
    setenv("MB_EMUCAM_FORMATS", "UYVY", 1);
    setenv("MB_EMUCAM_BPL_ALIGN", "1", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.fourcc, V4L2_PIX_FMT_YUV420);
    assert_int_equal(info.emulated, 1);
    assert_true(log_line("S_FMT UYVY 328x240") > 0);
    for (int i = 0; i < 5; i++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.view.width, W);
        assert_int_equal(f.view.height, H);
        assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
    }
    mb_source_close(src);
}

static void test_camera_size_is_checked(void **state)
{
    (void)state;
    char err[MB_ERR_LEN] = "";
    /* the camera clamps to 4096 px: another size than asked */
    assert_int_equal(try_open(5000, H, 0, -1, err), MB_ESIZE);
    assert_non_null(strstr(err, "5000x240"));
    /* 0 x 0 takes the camera's own size (640 x 480) */
    mb_source *src = open_cam(0, 0, 0, -1);
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.width, 640);
    assert_int_equal(info.height, 480);
    mb_source_close(src);
}

static void test_refused_opens(void **state)
{
    (void)state;
    char err[MB_ERR_LEN] = "", path[1100];
    mb_v4l2_config c;
    mb_v4l2_config_default(&c);
    mb_source *src = NULL;
    snprintf(path, sizeof path, "%s/no-such-camera", g_scratch);
    c.path = path;
    assert_int_equal(mb_v4l2_open(&c, &src, err), MB_ENOTFOUND);
    assert_null(src);
    assert_non_null(strstr(err, "no-such-camera"));
    /* a regular file the plugin does not claim is no V4L2 device */
    snprintf(path, sizeof path, "%s/plain-file", g_scratch);
    FILE *fp = fopen(path, "w");
    assert_non_null(fp);
    fclose(fp);
    assert_int_equal(mb_v4l2_open(&c, &src, err), MB_EIO);
    assert_null(src);
    unlink(path);
    c.path = g_link;
    c.buffers = 2;
    assert_int_equal(mb_v4l2_open(&c, &src, err), MB_EINVAL);
    assert_non_null(strstr(err, "buffers"));
    assert_int_equal(mb_v4l2_open(NULL, &src, err), MB_EINVAL);
    assert_null(src);
    /* info of a non-V4L2 source */
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(NULL, &info), MB_EINVAL);
}

/* ---- frames */

static void test_sequence_and_timestamps(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_FPS", "250", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    int64_t t_first = 0, t_prev = 0;
    const int n = 25;
    for (int i = 0; i < n; i++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(f.seq, (uint64_t)i);
        if (i > 0)
            assert_true(f.t_ns > t_prev);
        else
            t_first = f.t_ns;
        t_prev = f.t_ns;
        /* a monotonic timestamp of a frame already made */
        assert_true(f.t_ns <= mb_source_clock_ns());
    }
    /* the driver's timestamps are 4 ms apart at 250 frames/s */
    double mean_ms = (double)(t_prev - t_first) / (n - 1) / 1e6;
    assert_true(mean_ms > 3.9 && mean_ms < 4.1);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.frames, (uint64_t)n);
    assert_int_equal(s.dropped, 0);
    assert_int_equal(s.bad, 0);
    assert_string_equal(mb_source_name(src), "v4l2");
    mb_source_close(src);
}

static void test_injected_gap_counts_dropped(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_GAP_AT", "5", 1);
    setenv("MB_EMUCAM_GAP", "3", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    uint64_t prev = 0;
    int jumps = 0;
    for (int i = 0; i < 12; i++) {
        mb_frame f;
        next_ok(src, &f);
        assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
        if (i > 0) {
            assert_true(f.seq > prev);
            if (f.seq != prev + 1) {
                assert_int_equal(f.seq, prev + 4);
                jumps++;
            }
        }
        prev = f.seq;
    }
    assert_int_equal(jumps, 1);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.dropped, 3);
    assert_int_equal(s.frames, 12);
    mb_source_close(src);
}

static void test_slow_caller_loses_frames(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_FPS", "200", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_frame f;
    next_ok(src, &f);
    /* The caller is busy for 100 ms (20 frame periods): 3 buffers are
       queued, so 3 frames are kept and about 17 lost (more if the
       machine oversleeps). */
    mb_source_sleep_until(mb_source_clock_ns() + 100000000, -1);
    for (int i = 0; i < 6; i++)
        next_ok(src, &f);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.frames, 7);
    assert_true(s.dropped >= 12 && s.dropped <= 60);
    /* the public sequence accounts for every frame made */
    assert_int_equal(f.seq + 1, s.frames + s.dropped);
    assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
    mb_source_close(src);
}

static void test_stall_times_out_then_recovers(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_STALL_AT", "3", 1);
    setenv("MB_EMUCAM_STALL_MS", "400", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_frame f;
    for (int i = 0; i < 3; i++)
        next_ok(src, &f);
    char err[MB_ERR_LEN] = "";
    int64_t t0 = mb_source_clock_ns();
    assert_int_equal(mb_source_next(src, 150, &f, err), MB_ETIMEOUT);
    double ms = (double)(mb_source_clock_ns() - t0) / 1e6;
    /* the emulated DQBUF may overshoot by its 50 ms poll stand-in */
    assert_true(ms >= 145 && ms < 350);
    assert_null(f.view.pixels);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.timeouts, 1);
    assert_int_equal(s.faults, 0);
    /* the camera comes back by itself: same stream, next frame */
    next_ok(src, &f);
    assert_int_equal(f.seq, 3);
    assert_int_equal(mismatches(&f, 3), 0);
    mb_source_close(src);
}

static void test_short_frame_is_discarded(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_SHORT_AT", "2", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_frame f;
    uint64_t seen[4];
    for (int i = 0; i < 4; i++) {
        next_ok(src, &f);
        seen[i] = f.seq;
        assert_int_equal(mismatches(&f, (uint32_t)f.seq), 0);
    }
    assert_int_equal(seen[0], 0);
    assert_int_equal(seen[1], 1);
    assert_int_equal(seen[2], 3); /* frame 2 was short */
    assert_int_equal(seen[3], 4);
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.bad, 1);
    assert_int_equal(s.dropped, 1);
    mb_source_close(src);
}

static void test_unplug_and_reopen(void **state)
{
    (void)state;
    setenv("MB_EMUCAM_UNPLUG_AFTER", "5", 1);
    mb_source *src = open_cam(W, H, 0, -1);
    mb_frame f;
    for (int i = 0; i < 5; i++)
        next_ok(src, &f);
    char err[MB_ERR_LEN] = "";
    assert_int_equal(mb_source_next(src, 1000, &f, err), MB_ENODEV);
    assert_non_null(strstr(err, g_link));
    assert_true(log_line("UNPLUG after 5 frames") > 0);
    /* stays gone without touching the device */
    assert_int_equal(mb_source_next(src, 1000, &f, err), MB_ENODEV);

    /* the node disappears as when the cable is pulled */
    unplug();
    unsetenv("MB_EMUCAM_UNPLUG_AFTER");
    assert_int_equal(mb_source_reopen(src, err), MB_ENODEV);
    assert_non_null(strstr(err, "not back yet"));
    assert_int_equal(mb_source_next(src, 1000, &f, err), MB_ENODEV);

    /* plugged back in */
    plug();
    assert_int_equal(mb_source_reopen(src, err), 0);
    for (int i = 0; i < 4; i++) {
        next_ok(src, &f);
        assert_int_equal(f.seq, (uint64_t)(5 + i)); /* numbering goes on */
        assert_int_equal(mismatches(&f, (uint32_t)i), 0);
    }
    mb_source_stats s = mb_source_get_stats(src);
    assert_int_equal(s.frames, 9);
    assert_int_equal(s.reopens, 1);
    assert_int_equal(s.reopen_failures, 1);
    assert_int_equal(s.faults, 3);
    assert_int_equal(s.dropped, 0);
    mb_source_close(src);
}

/* ---- controls */

static void test_exposure_and_gain(void **state)
{
    (void)state;
    mb_source *src = open_cam(W, H, 5000, 40);
    mb_v4l2_info info;
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.exposure_100us, 50);
    assert_int_equal(info.gain, 40);
    int manual = log_line("S_CTRL exposure_auto=1");
    int absolute = log_line("S_CTRL exposure_absolute=50");
    assert_true(manual > 0);
    assert_true(absolute > manual); /* manual exposure first */
    assert_true(log_line("S_CTRL gain=40") > 0);
    assert_int_equal(log_line("S_CTRL exposure_absolute=50 refused"), 0);
    mb_frame f;
    next_ok(src, &f);
    mb_source_close(src);

    /* 149 us rounds to one unit of 100 us; 0 leaves exposure alone */
    unlink(g_log);
    src = open_cam(W, H, 149, -1);
    assert_int_equal(mb_v4l2_get_info(src, &info), 0);
    assert_int_equal(info.exposure_100us, 1);
    assert_int_equal(info.gain, -1);
    assert_int_equal(log_line("S_CTRL gain"), 0);
    mb_source_close(src);
    unlink(g_log);
    src = open_cam(W, H, 0, -1);
    assert_int_equal(log_line("S_CTRL"), 0);
    mb_source_close(src);
}

static void test_controls_refused(void **state)
{
    (void)state;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(try_open(W, H, 0, 999, err), MB_ERANGE);
    assert_non_null(strstr(err, "0..255"));
    assert_int_equal(try_open(W, H, 600000, -1, err), MB_ERANGE);
    setenv("MB_EMUCAM_NO_CONTROLS", "1", 1);
    assert_int_equal(try_open(W, H, 5000, -1, err), MB_EINVAL);
    assert_non_null(strstr(err, "exposure_us"));
    assert_int_equal(try_open(W, H, 0, 10, err), MB_EINVAL);
    assert_non_null(strstr(err, "gain"));
    /* without controls asked for, the camera opens */
    assert_int_equal(try_open(W, H, 0, -1, err), 0);
}

int main(int argc, char **argv)
{
    g_scratch = argc > 1 ? argv[1] : "test_v4l2_scratch";
    setenv("MB_V4L2_PLUGIN_DIR", MB_EMUCAM_PLUGIN_DIR, 0);
    setenv("LIBV4LCONTROL_CONTROLS", "0", 1);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_grey_is_chosen_and_used_in_place,
                                        setup, teardown),
        cmocka_unit_test_setup_teardown(test_yuyv_luma, setup, teardown),
        cmocka_unit_test_setup_teardown(test_yu12_converted_by_libv4lconvert,
                                        setup, teardown),
        cmocka_unit_test_setup_teardown(test_camera_size_is_checked, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_refused_opens, setup, teardown),
        cmocka_unit_test_setup_teardown(test_sequence_and_timestamps, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_injected_gap_counts_dropped, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_slow_caller_loses_frames, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_stall_times_out_then_recovers,
                                        setup, teardown),
        cmocka_unit_test_setup_teardown(test_short_frame_is_discarded, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_unplug_and_reopen, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_exposure_and_gain, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_controls_refused, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
