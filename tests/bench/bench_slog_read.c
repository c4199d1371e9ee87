/*
 * tests/bench/bench_slog_read.c - the shift-log reader's two parsers on the
 * same files: seconds and records per second for the purpose-built scanner
 * and for cJSON (io/shiftlog_read.h). Run by bench_report.py.
 *   bench_slog_read FILE...
 */
#include "error.h"
#include "shiftlog_read.h"

#include <cblas.h>
#include <stdio.h>
#include <time.h>

static int count(const mb_slog_record *rec, void *user)
{
    long *n = user;
    *n += rec->kind == MB_SLOG_PART;
    return 0;
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int main(int argc, char **argv)
{
    static const char *const names[2] = {"scanner", "cJSON"};
    openblas_set_num_threads(1); /* no BLAS here; keep its threads idle */
    for (int p = 0; p < 2; p++) {
        long parts = 0, lines = 0;
        double t0 = now();
        clock_t c0 = clock();
        for (int i = 1; i < argc; i++) {
            mb_slog_stats st;
            char err[MB_ERR_LEN];
            if (mb_slog_read_file(argv[i], p ? MB_SLOG_PARSER_CJSON : MB_SLOG_PARSER_SCAN,
                                  count, &parts, &st, err)) {
                fprintf(stderr, "bench_slog_read: %s\n", err);
                return 1;
            }
            lines += st.lines;
        }
        double dt = now() - t0;
        double cpu = (double)(clock() - c0) / CLOCKS_PER_SEC;
        printf("read with the %-8s %ld lines, %ld parts in %.2f s, CPU %.2f s "
               "(%.2f us CPU per line)\n",
               names[p], lines, parts, dt, cpu, 1e6 * cpu / (double)lines);
    }
    return 0;
}
