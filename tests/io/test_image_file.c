/*
 * tests/io/test_image_file.c - PGM and PNG files: exact round trips,
 * 16-bit and odd maxval scaling against hand values, plain PGM, PNG colour
 * types converted to 8-bit grey, and every kind of bad input refused with
 * the right code and a sentence naming the file.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "image.h"
#include "image_file.h"

#include <png.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static char scratch[64];

static int setup_scratch(void **state)
{
    (void)state;
    snprintf(scratch, sizeof scratch, "image_scratch_XXXXXX");
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
    static char buf[4][256];
    static int k;
    k = (k + 1) % 4;
    snprintf(buf[k], sizeof buf[k], "%s/%s", scratch, name);
    return buf[k];
}

static void write_file(const char *path, const void *data, size_t len)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(data, 1, len, f), len);
    assert_int_equal(fclose(f), 0);
}

static uint8_t *read_file(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    fseek(f, 0, SEEK_END);
    *len = (size_t)ftell(f);
    fseek(f, 0, SEEK_SET);
    uint8_t *b = malloc(*len + 1);
    assert_non_null(b);
    assert_int_equal(fread(b, 1, *len, f), *len);
    fclose(f);
    return b;
}

/* Decode a buffer, expecting `code`; on failure the sentence must start
   with the name and contain `phrase`. */
static void expect_decode(const char *text, size_t len, int code,
                          const char *phrase, mb_image *out)
{
    char err[MB_ERR_LEN] = "";
    mb_image tmp;
    mb_image *im = out ? out : &tmp;
    int rc = mb_image_decode((const uint8_t *)text, len, "frame.pgm", im, err);
    if (rc != code)
        fail_msg("expected %d (%s), got %d: %s", code, mb_strerror(code), rc,
                 err);
    if (code < 0) {
        assert_null(im->pixels);
        if (strncmp(err, "frame.pgm: ", 11) != 0)
            fail_msg("sentence does not start with the file name: %s", err);
        if (phrase && !strstr(err, phrase))
            fail_msg("sentence lacks \"%s\": %s", phrase, err);
    } else if (!out) {
        mb_image_free(im);
    }
}

/* A test pattern in a view with a stride wider than its width. */
static void pattern(mb_image *big, mb_image *view)
{
    assert_int_equal(mb_image_alloc(53, 31, big), 0);
    for (int y = 0; y < big->height; y++)
        for (int x = 0; x < big->width; x++)
            big->pixels[y * big->stride + x] =
                (uint8_t)((x * 7 + y * 13) ^ (x * y));
    *view = mb_image_view(big, 5, 3, 37, 23);
}

static void assert_same(const mb_image *a, const mb_image *b)
{
    assert_int_equal(a->width, b->width);
    assert_int_equal(a->height, b->height);
    for (int y = 0; y < a->height; y++)
        assert_memory_equal(a->pixels + (size_t)y * a->stride,
                            b->pixels + (size_t)y * b->stride,
                            (size_t)a->width);
}

static void test_round_trip(void **state)
{
    (void)state;
    mb_image big, view, back;
    char err[MB_ERR_LEN];
    pattern(&big, &view);
    const char *names[] = {"a.pgm", "b.png", "c.PNG", "d.image"};
    for (int i = 0; i < 4; i++) {
        const char *p = spath(names[i]);
        assert_int_equal(mb_image_save(p, &view, err), 0);
        assert_int_equal(mb_image_load(p, &back, err), 0);
        assert_same(&view, &back);
        mb_image_free(&back);
    }
    /* the PGM is exactly header + raster; the PNG and the .image file are
       told apart by their first bytes, not their names */
    size_t len;
    uint8_t *b = read_file(spath("a.pgm"), &len);
    assert_int_equal(len, strlen("P5\n37 23\n255\n") + 37 * 23);
    assert_memory_equal(b, "P5\n37 23\n255\n", 13);
    free(b);
    b = read_file(spath("c.PNG"), &len);
    assert_memory_equal(b, "\x89PNG", 4);
    free(b);
    b = read_file(spath("d.image"), &len);
    assert_memory_equal(b, "P5", 2);
    free(b);
    mb_image_free(&big);
}

/* 16-bit and other maxval: round(v * 255 / maxval), halves up. */
static void test_pgm_scaling(void **state)
{
    (void)state;
    mb_image im;
    /* hand values: 25700 = 100 * 257 -> 100; 32767 * 255 / 65535 = 127.498
       -> 127; 32768 -> 127.502 -> 128; 128 -> 0.498 -> 0; 129 -> 0.502 -> 1 */
    const uint16_t v16[8] = {0, 1, 128, 129, 32767, 32768, 25700, 65535};
    const uint8_t want16[8] = {0, 0, 0, 1, 127, 128, 100, 255};
    char buf[64];
    int h = snprintf(buf, sizeof buf, "P5\n4 2\n65535\n");
    for (int i = 0; i < 8; i++) {
        buf[h + 2 * i] = (char)(v16[i] >> 8);
        buf[h + 2 * i + 1] = (char)(v16[i] & 255);
    }
    expect_decode(buf, (size_t)h + 16, 0, NULL, &im);
    for (int i = 0; i < 8; i++)
        assert_int_equal(im.pixels[(i / 4) * im.stride + i % 4], want16[i]);
    mb_image_free(&im);
    /* maxval 1000 (two bytes: above 255): 500 -> 127.5 -> 128; 999 -> 254.745
       -> 255; 2 -> 0.51 -> 1 */
    h = snprintf(buf, sizeof buf, "P5 3 1 1000 ");
    const uint16_t v1k[3] = {500, 999, 2};
    for (int i = 0; i < 3; i++) {
        buf[h + 2 * i] = (char)(v1k[i] >> 8);
        buf[h + 2 * i + 1] = (char)(v1k[i] & 255);
    }
    expect_decode(buf, (size_t)h + 6, 0, NULL, &im);
    assert_int_equal(im.pixels[0], 128);
    assert_int_equal(im.pixels[1], 255);
    assert_int_equal(im.pixels[2], 1);
    mb_image_free(&im);
    /* maxval 15, one byte: 15 -> 255, 7 -> 119, 8 -> 136 */
    expect_decode("P5\n3 1\n15\n\x0f\x07\x08", 13, 0, NULL, &im);
    assert_int_equal(im.pixels[0], 255);
    assert_int_equal(im.pixels[1], 119);
    assert_int_equal(im.pixels[2], 136);
    mb_image_free(&im);
}

static void test_pgm_plain_and_comments(void **state)
{
    (void)state;
    mb_image im;
    const char *p2 =
        "P2\n# a plain grey map\n3 2\n# max\n255\n0 10 20\n 30\t40\r\n255\n";
    expect_decode(p2, strlen(p2), 0, NULL, &im);
    const uint8_t want[6] = {0, 10, 20, 30, 40, 255};
    for (int i = 0; i < 6; i++)
        assert_int_equal(im.pixels[(i / 3) * im.stride + i % 3], want[i]);
    mb_image_free(&im);
    const char *p5 = "P5 # made by hand\n2 2 # size\n255\nABCD";
    expect_decode(p5, strlen(p5), 0, NULL, &im);
    assert_int_equal(im.pixels[0], 'A');
    assert_int_equal(im.pixels[im.stride + 1], 'D');
    mb_image_free(&im);
}

static void test_pgm_bad(void **state)
{
    (void)state;
    expect_decode("P5\n4 4\n255\n", 11, MB_EFORMAT, "truncated", NULL);
    expect_decode("P5\n4 4\n255\nabcdefgh", 19, MB_EFORMAT, "8 bytes where 4x4",
                  NULL);
    expect_decode("P5\n640", 6, MB_EFORMAT, "ends inside its header", NULL);
    expect_decode("P5\n640 480", 10, MB_EFORMAT, "maximum grey value", NULL);
    expect_decode("P5\n4 4\n65535\n", 13, MB_EFORMAT, "truncated", NULL);
    expect_decode("P2\n3 1\n255\n1 2", 14, MB_EFORMAT, "ends after 2 of 3",
                  NULL);
    expect_decode("P2\n3 1\n255\n1 x 2", 16, MB_EFORMAT, "sample 1", NULL);
    expect_decode("P5\nabc 10\n255\n", 14, MB_EFORMAT, "width", NULL);
    expect_decode("P5\n10 -3\n255\n", 13, MB_EFORMAT, "height", NULL);
    expect_decode("P5\n0 10\n255\n", 12, MB_EFORMAT, "at least 1x1", NULL);
    expect_decode("P5\n1 1\n0\nA", 10, MB_EFORMAT, "maximum grey value 0",
                  NULL);
    expect_decode("P5\n1 1\n70000\nAA", 15, MB_EFORMAT, "1..65535", NULL);
    expect_decode("P5\n2 1\n100\n\x32\x65", 13, MB_EFORMAT, "above the maximum",
                  NULL);
    expect_decode("P5x 1 1 255\nA", 13, MB_EFORMAT, "white space", NULL);
    expect_decode("P6\n1 1\n255\nabc", 14, MB_EFORMAT, "P6", NULL);
    expect_decode("GIF89a", 6, MB_EFORMAT, "unknown image format", NULL);
    expect_decode("", 0, MB_EFORMAT, "empty", NULL);
    /* huge sizes are refused before any pixel memory is asked for */
    expect_decode("P5\n20000 20000\n255\nAAAA", 23, MB_ERANGE, "20000x20000",
                  NULL);
    expect_decode("P5\n16384 16385\n255\nA", 20, MB_ERANGE, "16384x16384",
                  NULL);
    expect_decode("P5\n9999999999 2\n255\nA", 20, MB_EFORMAT, "width", NULL);
    /* the largest accepted side is fine when the data is there */
    size_t n = 16 + 16384;
    char *big = malloc(n);
    assert_non_null(big);
    int h = snprintf(big, n, "P5\n16384 1\n255\n");
    memset(big + h, 7, 16384);
    mb_image im;
    expect_decode(big, (size_t)h + 16384, 0, NULL, &im);
    assert_int_equal(im.width, 16384);
    assert_int_equal(im.pixels[16383], 7);
    mb_image_free(&im);
    free(big);
}

/* Write a PNG of any type with libpng directly (rows packed as libpng
   expects them for that type and depth). */
static void write_png_raw(const char *path, int w, int h, int depth, int type,
                          int interlace, const uint8_t *data, size_t row_bytes,
                          const png_color *palette, int n_palette)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    png_structp png =
        png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png_create_info_struct(png);
    assert_non_null(info);
    if (setjmp(png_jmpbuf(png)))
        fail_msg("libpng failed to write the test file");
    png_init_io(png, f);
    png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, depth, type,
                 interlace ? PNG_INTERLACE_ADAM7 : PNG_INTERLACE_NONE,
                 PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    if (palette)
        png_set_PLTE(png, info, palette, n_palette);
    png_write_info(png, info);
    png_bytep rows[64];
    for (int y = 0; y < h; y++)
        rows[y] = (png_bytep)(data + (size_t)y * row_bytes);
    png_write_image(png, rows);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    fclose(f);
}

static mb_image load_ok(const char *path)
{
    mb_image im;
    char err[MB_ERR_LEN] = "";
    int rc = mb_image_load(path, &im, err);
    if (rc < 0)
        fail_msg("%s", err);
    return im;
}

static void test_png_types(void **state)
{
    (void)state;
    char err[MB_ERR_LEN];
    /* RGB through our own writer: Rec. 601 luma, 0.299 R + 0.587 G +
       0.114 B: red 76.2, green 149.7, blue 29.1, (200, 100, 50) 124.2 */
    const uint8_t rgb[6 * 3] = {255, 0,   0,   0,   255, 0,   0,   0,   255,
                                255, 255, 255, 100, 100, 100, 200, 100, 50};
    assert_int_equal(
        mb_image_save_png_rgb(spath("rgb.png"), 6, 1, rgb, 18, err), 0);
    mb_image im = load_ok(spath("rgb.png"));
    const int want[6] = {76, 150, 29, 255, 100, 124};
    for (int i = 0; i < 6; i++)
        if (abs(im.pixels[i] - want[i]) > (i == 3 || i == 4 ? 0 : 1))
            fail_msg("colour %d: grey %d, Rec. 601 luma %d", i, im.pixels[i],
                     want[i]);
    mb_image_free(&im);

    /* 16-bit grey, scaled: same hand values as the PGM */
    const uint16_t v16[6] = {0, 128, 129, 32767, 32768, 25700};
    const uint8_t want16[6] = {0, 0, 1, 127, 128, 100};
    uint8_t be[12];
    for (int i = 0; i < 6; i++) {
        be[2 * i] = (uint8_t)(v16[i] >> 8);
        be[2 * i + 1] = (uint8_t)(v16[i] & 255);
    }
    write_png_raw(spath("g16.png"), 6, 1, 16, PNG_COLOR_TYPE_GRAY, 0, be, 12,
                  NULL, 0);
    im = load_ok(spath("g16.png"));
    for (int i = 0; i < 6; i++)
        assert_int_equal(im.pixels[i], want16[i]);
    mb_image_free(&im);

    /* palette: grey entries stay, a colour entry becomes its luma */
    const png_color pal[3] = {{10, 10, 10}, {200, 200, 200}, {0, 255, 0}};
    const uint8_t idx[4] = {0, 1, 2, 1};
    write_png_raw(spath("pal.png"), 4, 1, 8, PNG_COLOR_TYPE_PALETTE, 0, idx, 4,
                  pal, 3);
    im = load_ok(spath("pal.png"));
    assert_int_equal(im.pixels[0], 10);
    assert_int_equal(im.pixels[1], 200);
    assert_true(abs(im.pixels[2] - 150) <= 1);
    mb_image_free(&im);

    /* grey + alpha: the alpha is dropped, the grey kept */
    const uint8_t ga[6] = {30, 255, 60, 0, 90, 128};
    write_png_raw(spath("ga.png"), 3, 1, 8, PNG_COLOR_TYPE_GRAY_ALPHA, 0, ga, 6,
                  NULL, 0);
    im = load_ok(spath("ga.png"));
    assert_int_equal(im.pixels[0], 30);
    assert_int_equal(im.pixels[1], 60);
    assert_int_equal(im.pixels[2], 90);
    mb_image_free(&im);

    /* RGBA 16-bit: both transformations at once */
    uint8_t rgba16[8] = {0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x00, 0x00};
    write_png_raw(spath("rgba16.png"), 1, 1, 16, PNG_COLOR_TYPE_RGB_ALPHA, 0,
                  rgba16, 8, NULL, 0);
    im = load_ok(spath("rgba16.png"));
    assert_int_equal(im.pixels[0], 255);
    mb_image_free(&im);

    /* 1-bit grey: 0 and 255 */
    const uint8_t bits[1] = {0xA0}; /* 1 0 1 0 ... */
    write_png_raw(spath("g1.png"), 4, 1, 1, PNG_COLOR_TYPE_GRAY, 0, bits, 1,
                  NULL, 0);
    im = load_ok(spath("g1.png"));
    assert_int_equal(im.pixels[0], 255);
    assert_int_equal(im.pixels[1], 0);
    assert_int_equal(im.pixels[2], 255);
    assert_int_equal(im.pixels[3], 0);
    mb_image_free(&im);

    /* Adam7 interlaced grey: the same pixels as written */
    uint8_t g[40 * 30];
    for (int i = 0; i < 40 * 30; i++)
        g[i] = (uint8_t)(i * 37 + i / 40);
    write_png_raw(spath("adam7.png"), 40, 30, 8, PNG_COLOR_TYPE_GRAY, 1, g, 40,
                  NULL, 0);
    im = load_ok(spath("adam7.png"));
    for (int y = 0; y < 30; y++)
        assert_memory_equal(im.pixels + y * im.stride, g + 40 * y, 40);
    mb_image_free(&im);

    /* a PNG wider than the limit: refused from its header */
    uint8_t *wide = calloc(20000, 1);
    assert_non_null(wide);
    write_png_raw(spath("wide.png"), 20000, 1, 8, PNG_COLOR_TYPE_GRAY, 0, wide,
                  20000, NULL, 0);
    free(wide);
    im.pixels = (uint8_t *)err;
    assert_int_equal(mb_image_load(spath("wide.png"), &im, err), MB_ERANGE);
    assert_null(im.pixels);
    assert_non_null(strstr(err, "20000x1"));
}

/* Every truncation of a PNG, and a flipped byte in its pixel data, give
   MB_EFORMAT with the file named; never a crash, never an image. */
static void test_png_truncated_and_corrupt(void **state)
{
    (void)state;
    mb_image big, view;
    char err[MB_ERR_LEN];
    pattern(&big, &view);
    assert_int_equal(mb_image_save_png(spath("t.png"), &view, err), 0);
    size_t len;
    uint8_t *b = read_file(spath("t.png"), &len);
    for (size_t cut = 0; cut < len; cut += (cut < 64 ? 1 : 7)) {
        mb_image im;
        int rc = mb_image_parse_png(b, cut, "t.png", &im, err);
        if (rc != MB_EFORMAT)
            fail_msg("PNG cut to %zu of %zu bytes: got %d (%s)", cut, len, rc,
                     err);
        assert_null(im.pixels);
        assert_memory_equal(err, "t.png: ", 7);
    }
    /* flip one byte inside the IDAT data: the CRC (or zlib) catches it */
    uint8_t *c = malloc(len);
    assert_non_null(c);
    memcpy(c, b, len);
    c[len - 30] ^= 0x5a;
    write_file(spath("corrupt.png"), c, len);
    mb_image im;
    assert_int_equal(mb_image_load(spath("corrupt.png"), &im, err), MB_EFORMAT);
    assert_non_null(strstr(err, "corrupt.png: corrupt or truncated PNG"));
    /* through mb_image_load, a truncated file */
    write_file(spath("short.png"), b, len / 2);
    assert_int_equal(mb_image_load(spath("short.png"), &im, err), MB_EFORMAT);
    assert_non_null(strstr(err, "short.png"));
    free(c);
    free(b);
    mb_image_free(&big);
}

static void test_files(void **state)
{
    (void)state;
    char err[MB_ERR_LEN];
    mb_image im, big, view;
    assert_int_equal(mb_image_load(spath("none.pgm"), &im, err), MB_ENOTFOUND);
    assert_non_null(strstr(err, "none.pgm"));
    assert_int_equal(mb_image_load(scratch, &im, err), MB_EIO); /* a folder */
    pattern(&big, &view);
    assert_int_equal(mb_image_save_pgm(spath("no/such/dir/x.pgm"), &view, err),
                     MB_EIO);
    assert_non_null(strstr(err, "x.pgm"));
    assert_int_equal(mb_image_save_png(spath("no/such/dir/x.png"), &view, err),
                     MB_EIO);
    assert_non_null(strstr(err, "x.png"));
    assert_int_equal(mb_image_save_pgm(spath("x.pgm"), NULL, err), MB_EINVAL);
    assert_int_equal(
        mb_image_save_png_rgb(spath("x.png"), 4, 4, big.pixels, 11, err),
        MB_EINVAL); /* stride below 3 * width */
    mb_image_free(&big);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_pgm_scaling),
        cmocka_unit_test(test_pgm_plain_and_comments),
        cmocka_unit_test(test_pgm_bad),
        cmocka_unit_test(test_png_types),
        cmocka_unit_test(test_png_truncated_and_corrupt),
        cmocka_unit_test(test_files),
    };
    return cmocka_run_group_tests(tests, setup_scratch, teardown_scratch);
}
