/*
 * tests/bench/bench_shiftlog.c - the shift log writer (io/shiftlog.h):
 * records per second and bytes per record for a typical part record (a
 * reject with two located reasons, 8 modes, 4 gauges), with fdatasync once
 * a second (the default) and after every record, and allocations per
 * record (must be 0). Gated: skipped (exit 77) under ctest unless
 * MB_BENCH=1:  MB_BENCH=1 ctest --test-dir build -R bench_shiftlog -V
 * or run build/tests/bench/bench_shiftlog [RECORDS] [FOLDER].
 */
#include "alloc_count.h"
#include "error.h"
#include "shiftlog.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>


static double mono_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return t.tv_sec * 1e3 + t.tv_nsec / 1e6;
}

static void fill(mb_shiftlog_part_rec *r, uint32_t seq)
{
    memset(r, 0, sizeof *r);
    r->seq = seq;
    r->frame_seq = 2u * seq;
    r->slot = 1;
    r->part = "RG-4030";
    r->model_checksum = "crc32:0badf00d";
    r->verdict = MB_SHIFTLOG_REJECT;
    r->n_reasons = 2;
    r->reasons[0] = (mb_shiftlog_reason){
        9, "nick", "nick 0.31 mm deep on outline 0 at 87 deg", 0.3125, 0.15,
        1, 0, 0.2417, 87.25, 0.3125, 1.25};
    r->reasons[1] = (mb_shiftlog_reason){
        10, "flash", "flash 0.22 mm high on outline 1 at 201 deg", 0.2217,
        0.15, 1, 1, 0.5583, 201.0, 0.2217, 0.8};
    r->has_pose = 1;
    r->x = 640.123456 + seq % 100;
    r->y = 511.987654;
    r->angle_deg = -12.3456789;
    r->scale = 1.00123456;
    r->n_modes = 8;
    for (int i = 0; i < 8; i++)
        r->modes[i] = 0.123456789 * (i - 4);
    r->t2 = 7.891011;
    r->residual = 0.000123456;
    r->size_mm = 42.123456;
    r->n_gauges = 4;
    static const char *const g[] = {"bore", "od", "width", "pitch"};
    for (int i = 0; i < 4; i++)
        r->gauges[i] = (mb_shiftlog_gauge){g[i], 30.01234 + i, 30.0 + i, -0.1,
                                           0.1, 1};
    r->cycle_ms = 3.456789;
    r->image = "rejects/2026-12-01/070000.125_17.png";
}

/* Write n records at 5 ms of log time apart; flush as given. */
static int run(const char *folder, int n, int flush_s, double *rate,
               double *bytes_per, unsigned long *allocs_per_1000)
{
    mb_shift_def d[1] = {{"all", 0}};
    mb_shift_calendar cal;
    char err[MB_ERR_LEN];
    mb_shift_calendar_init(&cal, d, 1, "shifts", err);
    mb_shiftlog_config c = {folder, "bench", &cal, flush_s, 0, 1, "m.json",
                            "crc32:0badf00d"};
    int64_t t0 = mb_shiftlog_now_ms();
    mb_shiftlog *log = NULL;
    if (mb_shiftlog_open(&c, t0, &log, err) < 0 || mb_shiftlog_problem(log)) {
        fprintf(stderr, "bench_shiftlog: %s\n", err);
        return 1;
    }
    mb_shiftlog_part_rec r;
    fill(&r, 0);
    mb_shiftlog_part(log, t0, &r, err); /* warm up (time zone, file) */
    struct stat s0, s1;
    fstat(mb_shiftlog_fd(log), &s0);
    unsigned long a0 = (unsigned long)mb_allocs();
    double w0 = mono_ms();
    for (int i = 1; i <= n; i++) {
        r.seq = (uint32_t)i;
        r.x = 640.123456 + i % 100;
        if (mb_shiftlog_part(log, t0 + 5 * (int64_t)i, &r, err) < 0) {
            fprintf(stderr, "bench_shiftlog: %s\n", err);
            return 1;
        }
    }
    double w1 = mono_ms();
    unsigned long a1 = (unsigned long)mb_allocs();
    fstat(mb_shiftlog_fd(log), &s1);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    mb_shiftlog_close(log);
    *rate = n / ((w1 - w0) / 1e3);
    *bytes_per = (double)(s1.st_size - s0.st_size) / n;
    *allocs_per_1000 = (a1 - a0) * 1000ul / (unsigned long)n;
    printf("  flush every %s: %d records in %.1f ms: %.0f records/s, "
           "%.1f us/record, %.0f bytes/record, %llu fdatasync\n",
           flush_s ? "1 s of log time (5 ms/part: every 200 records)"
                   : "record",
           n, w1 - w0, *rate, (w1 - w0) * 1e3 / n, *bytes_per,
           (unsigned long long)st.syncs);
    return 0;
}

int main(int argc, char **argv)
{
    if (getenv("MB_BENCH_GATED") && !getenv("MB_BENCH")) {
        printf("bench_shiftlog: skipped (set MB_BENCH=1 to run)\n");
        return 77;
    }
    int n = argc > 1 ? atoi(argv[1]) : 100000;
    char folder[256];
    snprintf(folder, sizeof folder, "%s",
             argc > 2 ? argv[2] : "bench_shiftlog_scratch");
    char cmd[300];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", folder);
    if (system(cmd) != 0)
        return 1;
    printf("bench_shiftlog: a reject record (2 located reasons, 8 modes, 4 "
           "gauges) into %s\n", folder);
    double rate, bytes;
    unsigned long a;
    if (run(folder, n, 1, &rate, &bytes, &a))
        return 1;
    printf("  allocations per 1000 records: %lu (must be 0)\n", a);
    int bad = a != 0;
    double rate0;
    if (run(folder, n / 50 > 200 ? n / 50 : 200, 0, &rate0, &bytes, &a))
        return 1;
    if (system(cmd) != 0)
        return 1;
    return bad;
}
