/*
 * tests/fit/outline_ref_driver.c - runs the pyramid, the samplers, Otsu
 * and the outliner on images from files, for the reference checks
 * ref_pyramid.py and ref_otsu.py (which compare with scipy.ndimage and
 * skimage.filters).
 *
 *   outline_ref_driver pyramid IN.pgm LEVELS OUTDIR
 *       writes OUTDIR/level1.pgm .. level(LEVELS-1).pgm
 *   outline_ref_driver sample IN.pgm LEVELS POINTS.txt
 *       POINTS.txt: lines "level x y"; prints "grey gx gy" per line (%.17g)
 *   outline_ref_driver otsu IN.pgm
 *       prints "threshold eta mean_dark mean_bright" of the image histogram
 *   outline_ref_driver outline IN.pgm LEVEL
 *       runs the outliner on working level LEVEL; prints "rc threshold
 *       part_dark n_outlines"
 *
 * Images: binary PGM (P5), maxval 255. Exit 0, or 2 on bad use or input.
 */
#include "error.h"
#include "image.h"
#include "outline.h"
#include "pyramid.h"

#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int pgm_token(FILE *f, int *v)
{
    int c;
    do {
        c = fgetc(f);
        if (c == '#')
            while (c != '\n' && c != EOF)
                c = fgetc(f);
    } while (c != EOF && isspace(c));
    if (c == EOF || !isdigit(c))
        return -1;
    long n = 0;
    while (c != EOF && isdigit(c)) {
        n = n * 10 + (c - '0');
        if (n > 1000000)
            return -1;
        c = fgetc(f);
    }
    *v = (int)n;
    return 0; /* the one whitespace after the last header token is eaten */
}

static int read_pgm(const char *path, mb_image *img)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "%s: cannot open\n", path);
        return -1;
    }
    int w, h, maxval,
        ok = fgetc(f) == 'P' && fgetc(f) == '5' && pgm_token(f, &w) == 0 &&
             pgm_token(f, &h) == 0 && pgm_token(f, &maxval) == 0 &&
             maxval == 255 && mb_image_alloc(w, h, img) == 0;
    for (int y = 0; ok && y < h; y++)
        ok = fread(img->pixels + (size_t)y * img->stride, 1, (size_t)w, f) ==
             (size_t)w;
    fclose(f);
    if (!ok)
        fprintf(stderr, "%s: not an 8-bit binary PGM\n", path);
    return ok ? 0 : -1;
}

static int write_pgm(const char *path, const mb_image *img)
{
    FILE *f = fopen(path, "wb");
    if (!f)
        return -1;
    fprintf(f, "P5\n%d %d\n255\n", img->width, img->height);
    for (int y = 0; y < img->height; y++)
        fwrite(img->pixels + (size_t)y * img->stride, 1, (size_t)img->width, f);
    return fclose(f);
}

static int usage(void)
{
    fprintf(stderr,
            "usage: outline_ref_driver pyramid IN.pgm LEVELS OUTDIR\n"
            "       outline_ref_driver sample IN.pgm LEVELS POINTS.txt\n"
            "       outline_ref_driver otsu IN.pgm\n"
            "       outline_ref_driver outline IN.pgm LEVEL\n");
    return 2;
}

int main(int argc, char **argv)
{
    if (argc < 3)
        return usage();
    mb_image img;
    if (read_pgm(argv[2], &img) != 0)
        return 2;
    int status = 0;
    if (!strcmp(argv[1], "pyramid") && argc == 5) {
        mb_pyramid *pyr;
        if (mb_pyramid_create(img.width, img.height, atoi(argv[3]), &pyr) !=
                0 ||
            mb_pyramid_build(pyr, &img) != 0)
            return 2;
        for (int l = 1; l < mb_pyramid_levels(pyr) && !status; l++) {
            char path[4096];
            snprintf(path, sizeof path, "%s/level%d.pgm", argv[4], l);
            status = write_pgm(path, mb_pyramid_level(pyr, l)) ? 2 : 0;
        }
        mb_pyramid_close(pyr);
    } else if (!strcmp(argv[1], "sample") && argc == 5) {
        mb_pyramid *pyr;
        if (mb_pyramid_create(img.width, img.height, atoi(argv[3]), &pyr) !=
                0 ||
            mb_pyramid_build(pyr, &img) != 0)
            return 2;
        FILE *f = fopen(argv[4], "r");
        if (!f)
            return 2;
        int l;
        double x, y, gx, gy;
        while (fscanf(f, "%d %lf %lf", &l, &x, &y) == 3) {
            const mb_image *lv = mb_pyramid_level(pyr, l);
            if (!lv) {
                status = 2;
                break;
            }
            mb_pyramid_gradient(lv, x, y, &gx, &gy);
            printf("%.17g %.17g %.17g\n", mb_pyramid_sample(lv, x, y), gx, gy);
        }
        fclose(f);
        mb_pyramid_close(pyr);
    } else if (!strcmp(argv[1], "otsu") && argc == 3) {
        uint32_t hist[256];
        mb_otsu o;
        mb_outline_histogram(&img, hist);
        int rc = mb_outline_threshold(hist, &o);
        printf("%d %.17g %.17g %.17g\n", rc ? -1 : o.threshold, o.eta,
               o.mean_dark, o.mean_bright);
    } else if (!strcmp(argv[1], "outline") && argc == 4) {
        mb_outline_config cfg;
        mb_outline_config_default(&cfg);
        cfg.level = atoi(argv[3]);
        mb_outliner *o;
        mb_outline_result res;
        char err[MB_ERR_LEN];
        if (mb_outliner_create(img.width, img.height, &cfg, &o, err) != 0) {
            fprintf(stderr, "%s\n", err);
            return 2;
        }
        int rc = mb_outliner_run(o, &img, &res, err);
        printf("%d %d %d %d\n", rc, res.otsu.threshold, res.part_dark,
               res.layout.n_outlines);
        mb_outliner_close(o);
    } else {
        status = usage();
    }
    mb_image_free(&img);
    return status;
}
