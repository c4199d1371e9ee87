/*
 * io/image_file.c - PGM (netpbm's format description, "pgm - Netpbm
 * grayscale image format") read and written here; PNG through libpng 1.6
 * (its manual, libpng-manual.txt: memory input through png_set_read_fn,
 * errors through a longjmp from our own error function, the png_set_*
 * input transformations).
 *
 * Every parser checks sizes before it allocates, so a corrupt header never
 * asks for gigabytes; libpng never prints (our error and warning functions
 * replace its default ones).
 */
#include "image_file.h"

#include "error.h"
#include "file_util.h"

#include <errno.h>
#include <png.h>
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

/* Largest file read: a 16-bit PGM of the largest size, with slack for a
   plain (ASCII) PGM of moderate size. */
#define MAX_FILE_BYTES ((size_t)1 << 30)

/* ---- PGM */

static int is_space(uint8_t c)
{
    return c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' ||
           c == '\f';
}

/* Skip white space and comments; returns 0 at a token, -1 at the end. */
static int skip_blank(const uint8_t *buf, size_t len, size_t *pos)
{
    while (*pos < len) {
        uint8_t c = buf[*pos];
        if (c == '#') {
            while (*pos < len && buf[*pos] != '\n' && buf[*pos] != '\r')
                (*pos)++;
        } else if (is_space(c)) {
            (*pos)++;
        } else {
            return 0;
        }
    }
    return -1;
}

/* A decimal number of at most 9 digits. Returns 0, -1 at the end of the
   buffer, -2 when the token is not a number (or too long). */
static int read_uint(const uint8_t *buf, size_t len, size_t *pos, long *out)
{
    if (skip_blank(buf, len, pos) < 0)
        return -1;
    long v = 0;
    int digits = 0;
    while (*pos < len && buf[*pos] >= '0' && buf[*pos] <= '9') {
        if (++digits > 9)
            return -2;
        v = v * 10 + (buf[*pos] - '0');
        (*pos)++;
    }
    if (digits == 0)
        return -2;
    if (*pos < len && !is_space(buf[*pos]) && buf[*pos] != '#')
        return -2;
    *out = v;
    return 0;
}

static int header_error(const char *name, const char *field, int why, char *err)
{
    if (why == -1)
        return mb_err_set(
            err, MB_EFORMAT,
            "%s: PGM file ends inside its header (reading the %s): "
            "truncated file",
            name, field);
    return mb_err_set(err, MB_EFORMAT,
                      "%s: PGM header: the %s is not a whole number", name,
                      field);
}

int mb_image_parse_pgm(const uint8_t *buf, size_t len, const char *name,
                       mb_image *out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "no image given");
    memset(out, 0, sizeof *out);
    if (!name)
        name = "(memory)";
    if (!buf || len < 2 || buf[0] != 'P' || (buf[1] != '5' && buf[1] != '2'))
        return mb_err_set(
            err, MB_EFORMAT,
            "%s: not a PGM file (expected \"P5\" or \"P2\" at the start)",
            name);
    int plain = buf[1] == '2';
    size_t pos = 2;
    if (pos < len && !is_space(buf[pos]) && buf[pos] != '#')
        return mb_err_set(err, MB_EFORMAT,
                          "%s: not a PGM file (no white space after \"P%c\")",
                          name, buf[1]);
    long w, h, maxval;
    int rc;
    if ((rc = read_uint(buf, len, &pos, &w)) < 0)
        return header_error(name, "width", rc, err);
    if ((rc = read_uint(buf, len, &pos, &h)) < 0)
        return header_error(name, "height", rc, err);
    if ((rc = read_uint(buf, len, &pos, &maxval)) < 0)
        return header_error(name, "maximum grey value", rc, err);
    if (w < 1 || h < 1)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: PGM size %ldx%ld: expected at least 1x1", name,
                          w, h);
    if (w > MB_IMAGE_MAX_SIDE || h > MB_IMAGE_MAX_SIDE)
        return mb_err_set(
            err, MB_ERANGE,
            "%s: PGM size %ldx%ld is larger than the %dx%d accepted", name, w,
            h, MB_IMAGE_MAX_SIDE, MB_IMAGE_MAX_SIDE);
    if (maxval < 1 || maxval > 65535)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: PGM maximum grey value %ld: expected 1..65535",
                          name, maxval);
    size_t npx = (size_t)w * (size_t)h;
    int bps = maxval > 255 ? 2 : 1;
    if (!plain) {
        /* exactly one white-space character ends the header */
        if (pos >= len)
            return mb_err_set(err, MB_EFORMAT,
                              "%s: PGM file ends after its header: truncated "
                              "file (no pixels)",
                              name);
        pos++;
        if (len - pos < npx * (size_t)bps)
            return mb_err_set(
                err, MB_EFORMAT,
                "%s: PGM pixel data is truncated: %zu bytes where %ldx%ld "
                "pixels of %d byte%s need %zu",
                name, len - pos, w, h, bps, bps > 1 ? "s" : "",
                npx * (size_t)bps);
    } else if (len - pos < npx) {
        /* each plain sample needs at least one digit and one separator */
        return mb_err_set(
            err, MB_EFORMAT,
            "%s: plain PGM is truncated: %zu bytes cannot hold %ldx%ld samples",
            name, len - pos, w, h);
    }
    uint8_t *lut = malloc((size_t)maxval + 1);
    if (!lut)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", name);
    for (long v = 0; v <= maxval; v++)
        lut[v] = (uint8_t)((v * 255 + maxval / 2) / maxval);
    rc = mb_image_alloc((int)w, (int)h, out);
    if (rc < 0) {
        free(lut);
        return mb_err_set(err, rc, "%s: out of memory for a %ldx%ld image",
                          name, w, h);
    }
    for (long y = 0; y < h; y++) {
        uint8_t *row = out->pixels + (size_t)y * (size_t)out->stride;
        for (long x = 0; x < w; x++) {
            long v;
            if (plain) {
                rc = read_uint(buf, len, &pos, &v);
                if (rc < 0) {
                    free(lut);
                    mb_image_free(out);
                    if (rc == -1)
                        return mb_err_set(
                            err, MB_EFORMAT,
                            "%s: plain PGM ends after %ld of %zu samples: "
                            "truncated file",
                            name, y * w + x, npx);
                    return mb_err_set(
                        err, MB_EFORMAT,
                        "%s: plain PGM sample %ld (x %ld, y %ld) is not a "
                        "whole number",
                        name, y * w + x, x, y);
                }
            } else if (bps == 1) {
                v = buf[pos++];
            } else {
                v = (long)buf[pos] << 8 | buf[pos + 1];
                pos += 2;
            }
            if (v > maxval) {
                free(lut);
                mb_image_free(out);
                return mb_err_set(
                    err, MB_EFORMAT,
                    "%s: PGM pixel (x %ld, y %ld) is %ld, above the "
                    "maximum grey value %ld",
                    name, x, y, v, maxval);
            }
            row[x] = lut[v];
        }
    }
    free(lut);
    return 0;
}

/* ---- PNG */

typedef struct {
    jmp_buf jump;
    char msg[200];
    const uint8_t *buf;
    size_t len, pos;
    mb_image img;     /* freed on error */
    uint8_t **rows;   /* freed always */
    uint8_t *rgb;     /* colour rows before conversion; freed always */
    FILE *file;       /* writers: closed on error */
    const char *name; /* for sentences (kept here, not in a local that a
                         longjmp could clobber) */
} png_ctx;

static void png_fail(png_structp png, png_const_charp msg)
{
    png_ctx *c = png_get_error_ptr(png);
    snprintf(c->msg, sizeof c->msg, "%s", msg ? msg : "unknown libpng error");
    longjmp(c->jump, 1);
}

static void png_warn(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* warnings (e.g. an unknown chunk) do not stop reading */
}

static void png_read_mem(png_structp png, png_bytep out, size_t n)
{
    png_ctx *c = png_get_io_ptr(png);
    if (n > c->len - c->pos)
        png_error(png, "file ends early: truncated data");
    memcpy(out, c->buf + c->pos, n);
    c->pos += n;
}

static const uint8_t png_magic[8] = {0x89, 'P',  'N',  'G',
                                     '\r', '\n', 0x1a, '\n'};

int mb_image_parse_png(const uint8_t *buf, size_t len, const char *name,
                       mb_image *out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "no image given");
    memset(out, 0, sizeof *out);
    if (!name)
        name = "(memory)";
    if (!buf || len < 8 || memcmp(buf, png_magic, 8) != 0)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: not a PNG file (no PNG signature)", name);
    png_ctx *c = calloc(1, sizeof *c);
    if (!c)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", name);
    c->buf = buf;
    c->len = len;
    c->name = name;
    int rc = 0;
    png_structp png =
        png_create_read_struct(PNG_LIBPNG_VER_STRING, c, png_fail, png_warn);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!png || !info) {
        png_destroy_read_struct(png ? &png : NULL, NULL, NULL);
        free(c);
        return mb_err_set(err, MB_ENOMEM,
                          "%s: out of memory for the PNG decoder", name);
    }
    if (setjmp(c->jump)) {
        rc = mb_err_set(err, MB_EFORMAT, "%s: corrupt or truncated PNG: %s",
                        c->name, c->msg);
        goto done;
    }
    png_set_read_fn(png, c, png_read_mem);
    png_read_info(png, info);
    png_uint_32 w = png_get_image_width(png, info);
    png_uint_32 h = png_get_image_height(png, info);
    int depth = png_get_bit_depth(png, info);
    int type = png_get_color_type(png, info);
    if (w > MB_IMAGE_MAX_SIDE || h > MB_IMAGE_MAX_SIDE) {
        rc =
            mb_err_set(err, MB_ERANGE,
                       "%s: PNG size %lux%lu is larger than the %dx%d accepted",
                       c->name, (unsigned long)w, (unsigned long)h,
                       MB_IMAGE_MAX_SIDE, MB_IMAGE_MAX_SIDE);
        goto done;
    }
    if (type == PNG_COLOR_TYPE_PALETTE)
        png_set_palette_to_rgb(png);
    if (type == PNG_COLOR_TYPE_GRAY && depth < 8)
        png_set_expand_gray_1_2_4_to_8(png);
    if (depth == 16)
        png_set_scale_16(png);
    if (type & PNG_COLOR_MASK_ALPHA)
        png_set_strip_alpha(png);
    /* Colour becomes grey here, not through png_set_rgb_to_gray, whose
       8-bit path truncates (half the pixels come out one level low). */
    int colour =
        (type & PNG_COLOR_MASK_COLOR) || type == PNG_COLOR_TYPE_PALETTE;
    png_set_interlace_handling(png);
    png_read_update_info(png, info);
    if (png_get_channels(png, info) != (colour ? 3 : 1) ||
        png_get_bit_depth(png, info) != 8) {
        rc = mb_err_set(
            err, MB_EFORMAT,
            "%s: PNG colour type %d, depth %d could not be turned into "
            "8-bit grey",
            c->name, type, depth);
        goto done;
    }
    rc = mb_image_alloc((int)w, (int)h, &c->img);
    c->rows = rc < 0 ? NULL : malloc(sizeof(uint8_t *) * h);
    if (rc == 0 && c->rows && colour)
        c->rgb = malloc((size_t)w * (size_t)h * 3);
    if (rc < 0 || !c->rows || (colour && !c->rgb)) {
        rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory for a %lux%lu image",
                        c->name, (unsigned long)w, (unsigned long)h);
        goto done;
    }
    for (png_uint_32 y = 0; y < h; y++)
        c->rows[y] = colour ? c->rgb + (size_t)y * w * 3
                            : c->img.pixels + (size_t)y * (size_t)c->img.stride;
    png_read_image(png, c->rows);
    png_read_end(png, NULL);
    if (colour) /* Rec. 601 luma in 16-bit fixed point, rounded */
        for (png_uint_32 y = 0; y < h; y++) {
            const uint8_t *p = c->rows[y];
            uint8_t *q = c->img.pixels + (size_t)y * (size_t)c->img.stride;
            for (png_uint_32 x = 0; x < w; x++, p += 3)
                q[x] = (uint8_t)((19595u * p[0] + 38470u * p[1] + 7471u * p[2] +
                                  32768u) >>
                                 16);
        }
    *out = c->img;
    memset(&c->img, 0, sizeof c->img);
    rc = 0;
done:
    png_destroy_read_struct(&png, &info, NULL);
    mb_image_free(&c->img);
    free(c->rows);
    free(c->rgb);
    free(c);
    return rc;
}

/* ---- detection and files */

int mb_image_decode(const uint8_t *buf, size_t len, const char *name,
                    mb_image *out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "no image given");
    memset(out, 0, sizeof *out);
    if (!name)
        name = "(memory)";
    if (buf && len >= 8 && memcmp(buf, png_magic, 8) == 0)
        return mb_image_parse_png(buf, len, name, out, err);
    if (buf && len >= 2 && buf[0] == 'P' && (buf[1] == '5' || buf[1] == '2'))
        return mb_image_parse_pgm(buf, len, name, out, err);
    if (buf && len >= 2 && buf[0] == 'P' && buf[1] >= '1' && buf[1] <= '7')
        return mb_err_set(
            err, MB_EFORMAT,
            "%s: a netpbm \"P%c\" file, not a grey map; expected PGM "
            "(P5 or P2) or PNG",
            name, buf[1]);
    if (!buf || len == 0)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: empty file; expected PGM or PNG", name);
    return mb_err_set(
        err, MB_EFORMAT,
        "%s: unknown image format (neither PGM nor PNG by its first bytes)",
        name);
}

int mb_image_load(const char *path, mb_image *out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "no image given");
    memset(out, 0, sizeof *out);
    char *buf = NULL;
    size_t len = 0;
    int rc = mb_file_read_all(path, MAX_FILE_BYTES, &buf, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_image_decode((const uint8_t *)buf, len, path, out, err);
    free(buf);
    return rc;
}

static int write_fail(const char *path, FILE *f, const char *what, char *err)
{
    if (f)
        fclose(f);
    remove(path);
    return mb_err_set(err, MB_EIO, "%s: %s", path, what);
}

int mb_image_save_pgm(const char *path, const mb_image *img, char *err)
{
    if (!path || !img || !img->pixels || img->width <= 0 || img->height <= 0)
        return mb_err_set(err, MB_EINVAL, "%s: no image to write",
                          path ? path : "(no file name)");
    FILE *f = fopen(path, "wb");
    if (!f)
        return mb_err_set(err, MB_EIO, "%s: cannot create: %s", path,
                          strerror(errno));
    if (fprintf(f, "P5\n%d %d\n255\n", img->width, img->height) < 0)
        return write_fail(path, f, "write failed", err);
    for (int y = 0; y < img->height; y++)
        if (fwrite(img->pixels + (size_t)y * (size_t)img->stride, 1,
                   (size_t)img->width, f) != (size_t)img->width)
            return write_fail(path, f, "write failed (disk full?)", err);
    if (fclose(f) != 0)
        return write_fail(path, NULL, "write failed on close (disk full?)",
                          err);
    return 0;
}

static int save_png(const char *path, int w, int h, const uint8_t *px,
                    int stride, int rgb, char *err)
{
    png_ctx *c = calloc(1, sizeof *c);
    if (!c)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    c->file = fopen(path, "wb");
    if (!c->file) {
        int e = errno;
        free(c);
        return mb_err_set(err, MB_EIO, "%s: cannot create: %s", path,
                          strerror(e));
    }
    int rc = 0;
    png_structp png =
        png_create_write_struct(PNG_LIBPNG_VER_STRING, c, png_fail, png_warn);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!png || !info) {
        png_destroy_write_struct(png ? &png : NULL, NULL);
        rc =
            write_fail(path, c->file, "out of memory for the PNG encoder", err);
        free(c);
        return rc == MB_EIO ? MB_ENOMEM : rc;
    }
    if (setjmp(c->jump)) {
        png_destroy_write_struct(&png, &info);
        rc = write_fail(path, c->file, c->msg, err);
        free(c);
        return rc;
    }
    png_init_io(png, c->file);
    /* zlib level 1 and the Sub filter alone: a noisy 1280 x 1024 frame in
       about 30 ms instead of about 100 ms with libpng's defaults (level 6,
       adaptive filter choice), for a file about 8 % larger */
    png_set_compression_level(png, 1);
    png_set_filter(png, 0, PNG_FILTER_SUB);
    png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, 8,
                 rgb ? PNG_COLOR_TYPE_RGB : PNG_COLOR_TYPE_GRAY,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (int y = 0; y < h; y++)
        png_write_row(png, px + (size_t)y * (size_t)stride);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    FILE *f = c->file;
    free(c);
    if (fclose(f) != 0)
        return write_fail(path, NULL, "write failed on close (disk full?)",
                          err);
    return 0;
}

int mb_image_save_png(const char *path, const mb_image *img, char *err)
{
    if (!path || !img || !img->pixels || img->width <= 0 || img->height <= 0)
        return mb_err_set(err, MB_EINVAL, "%s: no image to write",
                          path ? path : "(no file name)");
    return save_png(path, img->width, img->height, img->pixels, img->stride, 0,
                    err);
}

int mb_image_save_png_rgb(const char *path, int w, int h, const uint8_t *rgb,
                          int stride, char *err)
{
    if (!path || !rgb || w <= 0 || h <= 0 || stride < 3 * w)
        return mb_err_set(err, MB_EINVAL, "%s: no RGB image to write",
                          path ? path : "(no file name)");
    return save_png(path, w, h, rgb, stride, 1, err);
}

int mb_image_save(const char *path, const mb_image *img, char *err)
{
    size_t n = path ? strlen(path) : 0;
    if (n >= 4 && strcasecmp(path + n - 4, ".png") == 0)
        return mb_image_save_png(path, img, err);
    return mb_image_save_pgm(path, img, err);
}
