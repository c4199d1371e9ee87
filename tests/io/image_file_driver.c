/*
 * tests/io/image_file_driver.c - our image files for ref_image_file.py:
 *   image_file_driver write DIR   writes ours.pgm, ours.png (grey test
 *                                 pattern) and ours_rgb.png (colour)
 *   image_file_driver read FILE   prints "W H" and then every pixel of the
 *                                 file as read by mb_image_load, a row per
 *                                 line
 * The pattern: grey(x, y) = (x * 7 + y * 13) ^ (x * y) & 255 on 123 x 77;
 * colour(x, y) = (x * 3 & 255, y * 5 & 255, (x + y) * 11 & 255).
 */
#include "error.h"
#include "image.h"
#include "image_file.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    char err[MB_ERR_LEN], path[4096];
    if (argc == 3 && !strcmp(argv[1], "write")) {
        mb_image im;
        if (mb_image_alloc(123, 77, &im) < 0)
            return 1;
        for (int y = 0; y < im.height; y++)
            for (int x = 0; x < im.width; x++)
                im.pixels[y * im.stride + x] =
                    (uint8_t)(((x * 7 + y * 13) ^ (x * y)) & 255);
        snprintf(path, sizeof path, "%s/ours.pgm", argv[2]);
        if (mb_image_save_pgm(path, &im, err) < 0)
            goto fail;
        snprintf(path, sizeof path, "%s/ours.png", argv[2]);
        if (mb_image_save_png(path, &im, err) < 0)
            goto fail;
        mb_image_free(&im);
        static uint8_t rgb[77][123 * 3];
        for (int y = 0; y < 77; y++)
            for (int x = 0; x < 123; x++) {
                rgb[y][3 * x] = (uint8_t)(x * 3 & 255);
                rgb[y][3 * x + 1] = (uint8_t)(y * 5 & 255);
                rgb[y][3 * x + 2] = (uint8_t)((x + y) * 11 & 255);
            }
        snprintf(path, sizeof path, "%s/ours_rgb.png", argv[2]);
        if (mb_image_save_png_rgb(path, 123, 77, &rgb[0][0], 123 * 3, err) < 0)
            goto fail;
        return 0;
    }
    if (argc == 3 && !strcmp(argv[1], "read")) {
        mb_image im;
        if (mb_image_load(argv[2], &im, err) < 0)
            goto fail;
        printf("%d %d\n", im.width, im.height);
        for (int y = 0; y < im.height; y++)
            for (int x = 0; x < im.width; x++)
                printf("%d%c", im.pixels[y * im.stride + x],
                       x + 1 < im.width ? ' ' : '\n');
        mb_image_free(&im);
        return 0;
    }
    fprintf(stderr, "usage: image_file_driver write DIR | read FILE\n");
    return 2;
fail:
    fprintf(stderr, "image_file_driver: %s\n", err);
    return 1;
}
