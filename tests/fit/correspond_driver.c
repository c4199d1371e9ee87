/*
 * tests/fit/correspond_driver.c - runs fit/correspond.h on numbers from a
 * file for ref_correspond.py and writes the results as JSON.
 *
 * usage: correspond_driver assign|run IN OUT
 *   assign: IN = T, then T times: n and the n x n costs row by row.
 *           OUT = {"assign": [[a_0 .. a_n-1], ...]} (column of each row).
 *   run:    IN = budget min_per_outline arc_smoothing m, then m times:
 *           K, the K point counts, and the points x y of all outlines.
 *           OUT = {"rc": .., "err": .., "layout": [..], "shapes": [[..]],
 *                  "parts": [{"status", "column", "source", "reversed",
 *                             "start"}]}.
 */
#include "correspond.h"
#include "error.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static FILE *in_file;

static double next_number(void)
{
    double v;
    if (fscanf(in_file, "%lf", &v) != 1) {
        fprintf(stderr, "correspond_driver: input ends early\n");
        exit(2);
    }
    return v;
}

static int next_int(void)
{
    return (int)next_number();
}

static void do_assign(FILE *out)
{
    int T = next_int();
    fprintf(out, "{\"assign\": [");
    for (int t = 0; t < T; t++) {
        int n = next_int();
        double *cost = malloc(sizeof(double) * (size_t)n * (size_t)n);
        int *a = malloc(sizeof(int) * (size_t)n);
        if (!cost || !a)
            exit(2);
        for (int i = 0; i < n; i++)
            for (int j = 0; j < n; j++)
                cost[i + (size_t)j * n] = next_number();
        int rc = mb_correspond_assign(cost, n, a);
        if (rc != 0) {
            fprintf(stderr, "correspond_driver: assign failed: %d\n", rc);
            exit(1);
        }
        fprintf(out, "%s[", t ? ", " : "");
        for (int i = 0; i < n; i++)
            fprintf(out, "%s%d", i ? ", " : "", a[i]);
        fprintf(out, "]");
        free(cost);
        free(a);
    }
    fprintf(out, "]}\n");
}

static void do_run(FILE *out)
{
    mb_correspond_params p;
    mb_correspond_params_default(&p);
    p.budget = next_int();
    p.min_per_outline = next_int();
    p.arc_smoothing = next_number();
    int m = next_int();
    mb_polyline_set *sets = calloc((size_t)m, sizeof *sets);
    double **xy = calloc((size_t)m, sizeof *xy);
    if (!sets || !xy)
        exit(2);
    for (int j = 0; j < m; j++) {
        sets[j].n_outlines = next_int();
        if (sets[j].n_outlines < 1 || sets[j].n_outlines > MB_MAX_OUTLINES)
            exit(2);
        size_t total = 0;
        for (int k = 0; k < sets[j].n_outlines; k++) {
            sets[j].counts[k] = next_int();
            total += (size_t)sets[j].counts[k];
        }
        xy[j] = malloc(sizeof(double) * 2 * (total ? total : 1));
        if (!xy[j])
            exit(2);
        for (size_t i = 0; i < 2 * total; i++)
            xy[j][i] = next_number();
        sets[j].xy = xy[j];
    }
    mb_layout lay;
    double *shapes = NULL;
    mb_correspond_info info;
    char err[MB_ERR_LEN] = "";
    int rc = mb_correspond_run(sets, m, &p, &lay, &shapes, &info, err);
    fprintf(out, "{\"rc\": %d, \"err\": \"", rc);
    for (const char *c = err; *c; c++)
        if (*c != '"' && *c != '\\')
            fputc(*c, out);
    fprintf(out, "\"");
    if (rc == 0) {
        fprintf(out, ", \"converged\": %d, \"layout\": [", info.converged);
        for (int k = 0; k < lay.n_outlines; k++)
            fprintf(out, "%s%d", k ? ", " : "", lay.counts[k]);
        fprintf(out, "], \"shapes\": [");
        for (int c = 0; c < info.n_used; c++) {
            fprintf(out, "%s[", c ? ", " : "");
            for (int i = 0; i < 2 * lay.n_points; i++)
                fprintf(out, "%s%.17g", i ? ", " : "",
                        shapes[(size_t)c * 2 * lay.n_points + i]);
            fprintf(out, "]");
        }
        fprintf(out, "], \"parts\": [");
        for (int j = 0; j < m; j++) {
            const mb_correspond_part *ip = &info.parts[j];
            fprintf(out, "%s{\"status\": %d, \"column\": %d, \"source\": [",
                    j ? ", " : "", ip->status, ip->column);
            for (int k = 0; k < lay.n_outlines; k++)
                fprintf(out, "%s%d", k ? ", " : "", ip->source[k]);
            fprintf(out, "], \"reversed\": [");
            for (int k = 0; k < lay.n_outlines; k++)
                fprintf(out, "%s%d", k ? ", " : "", ip->reversed[k]);
            fprintf(out, "], \"start\": [");
            for (int k = 0; k < lay.n_outlines; k++)
                fprintf(out, "%s%.17g", k ? ", " : "", ip->start[k]);
            fprintf(out, "]}");
        }
        fprintf(out, "]");
    }
    fprintf(out, "}\n");
    free(shapes);
    mb_correspond_info_free(&info);
    for (int j = 0; j < m; j++)
        free(xy[j]);
    free(xy);
    free(sets);
}

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: correspond_driver assign|run IN OUT\n");
        return 2;
    }
    in_file = fopen(argv[2], "r");
    FILE *out = fopen(argv[3], "w");
    if (!in_file || !out) {
        fprintf(stderr, "correspond_driver: cannot open %s or %s\n", argv[2],
                argv[3]);
        return 2;
    }
    if (strcmp(argv[1], "assign") == 0)
        do_assign(out);
    else if (strcmp(argv[1], "run") == 0)
        do_run(out);
    else
        return 2;
    fclose(in_file);
    return fclose(out) == 0 ? 0 : 2;
}
