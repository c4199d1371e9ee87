/*
 * tests/data/make_example_points.c - writes the bundled example point sets
 * (invented demo data): 30 good parts of a made-up flange gasket "FG-3140"
 * (rounded-rectangle outer edge 60 x 40 mm, an oval inner opening and two
 * bolt holes), each with natural variation and a random placement, in px at
 * 0.1 mm per px. Correspondence is given (point i is the same place on every
 * part), as a person or an outline tracer would supply.
 *
 * usage: make_example_points OUTDIR [COUNT] [SEED]
 * The committed files under tests/data/points/ came from the defaults.
 */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

static uint64_t rng_state;

static double urand(void) /* splitmix64 -> [0, 1) */
{
    uint64_t z = (rng_state += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    z ^= z >> 31;
    return (double)(z >> 11) * 0x1.0p-53;
}

static double nrand(void) /* Box-Muller */
{
    double u = urand(), v = urand();
    if (u < 1e-300)
        u = 1e-300;
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

/* Point at arc fraction t of a rounded rectangle (half sizes a, b, radius r). */
static void rounded_rect(double a, double b, double r, double t, double *x,
                         double *y)
{
    double sx = 2 * (a - r), sy = 2 * (b - r), arc = M_PI * r / 2;
    double per = 2 * sx + 2 * sy + 4 * arc, s = t * per;
    double seg[8] = {sx, arc, sy, arc, sx, arc, sy, arc};
    int i = 0;
    while (i < 7 && s > seg[i]) {
        s -= seg[i];
        i++;
    }
    switch (i) {
    case 0: *x = -a + r + s; *y = -b; return;
    case 2: *x = a; *y = -b + r + s; return;
    case 4: *x = a - r - s; *y = b; return;
    case 6: *x = -a; *y = b - r - s; return;
    default: break;
    }
    double cx[8] = {0, a - r, 0, a - r, 0, -a + r, 0, -a + r};
    double cy[8] = {0, -b + r, 0, b - r, 0, b - r, 0, -b + r};
    double a0 = -M_PI / 2 + (double)(i / 2) * M_PI / 2, ang = a0 + s / r;
    *x = cx[i] + r * cos(ang);
    *y = cy[i] + r * sin(ang);
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: make_example_points OUTDIR [COUNT] [SEED]\n");
        return 2;
    }
    int count = argc > 2 ? atoi(argv[2]) : 30;
    rng_state = argc > 3 ? strtoull(argv[3], NULL, 10) : 3140;
    enum { N_OUT = 64, N_IN = 32, N_HOLE = 12 };
    for (int p = 0; p < count; p++) {
        /* natural variation, mm */
        double a = 30.0 * (1 + 0.006 * nrand()), b = 20.0 * (1 + 0.006 * nrand());
        double r = 8.0 + 0.3 * nrand();
        double ia = 12.0 * (1 + 0.01 * nrand()), ib = 8.0 * (1 + 0.01 * nrand());
        double hx = 22.0 + 0.15 * nrand(), hr = 3.0 + 0.05 * nrand();
        double bend = 0.0003 * nrand(); /* slight bow along x */
        /* placement, px at 0.1 mm/px */
        double ang = 2 * M_PI * urand(), sc = 10.0 * (1 + 0.004 * nrand());
        double tx = 640 + 200 * (urand() - 0.5), ty = 512 + 150 * (urand() - 0.5);
        double pts[(N_OUT + N_IN + 2 * N_HOLE) * 2];
        int n = 0;
        for (int i = 0; i < N_OUT; i++, n++)
            rounded_rect(a, b, r, (double)i / N_OUT, &pts[2 * n], &pts[2 * n + 1]);
        for (int i = 0; i < N_IN; i++, n++) {
            double t = 2 * M_PI * i / N_IN;
            pts[2 * n] = ia * cos(t);
            pts[2 * n + 1] = ib * sin(t);
        }
        for (int h = 0; h < 2; h++)
            for (int i = 0; i < N_HOLE; i++, n++) {
                double t = 2 * M_PI * i / N_HOLE;
                pts[2 * n] = (h ? hx : -hx) + hr * cos(t);
                pts[2 * n + 1] = hr * sin(t);
            }
        char path[4096];
        snprintf(path, sizeof path, "%s/fg3140_%02d.json", argv[1], p + 1);
        FILE *f = fopen(path, "w");
        if (!f) {
            perror(path);
            return 1;
        }
        fprintf(f, "{\"format\": \"modeband-points\", \"version\": 1,\n"
                   " \"part\": \"FG-3140 flange gasket (invented demo part)\",\n"
                   " \"outlines\": [");
        int counts[4] = {N_OUT, N_IN, N_HOLE, N_HOLE}, k = 0;
        for (int o = 0; o < 4; o++) {
            fprintf(f, "%s\n  [", o ? "," : "");
            for (int i = 0; i < counts[o]; i++, k++) {
                double x = pts[2 * k], y = pts[2 * k + 1] + bend * x * x;
                double X = sc * (cos(ang) * x - sin(ang) * y) + tx + 0.05 * nrand();
                double Y = sc * (sin(ang) * x + cos(ang) * y) + ty + 0.05 * nrand();
                fprintf(f, "%s[%.3f, %.3f]", i ? ", " : "", X, Y);
            }
            fprintf(f, "]");
        }
        fprintf(f, "\n ]}\n");
        fclose(f);
    }
    return 0;
}
