/* tests/fuzz/fuzz_pgm.c - libFuzzer target for the PGM parser (P5 8/16-bit
   and P2, from memory). A success must give a sane image whose every pixel
   can be read; a failure must give no image and a sentence. */
#include "error.h"
#include "image.h"
#include "image_file.h"

#include <stddef.h>
#include <stdint.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    mb_image im;
    char err[MB_ERR_LEN] = "";
    int rc = mb_image_parse_pgm(data, size, "fuzz.pgm", &im, err);
    if (rc == 0) {
        MB_ASSERT(im.width >= 1 && im.height >= 1);
        MB_ASSERT(im.width <= MB_IMAGE_MAX_SIDE &&
                  im.height <= MB_IMAGE_MAX_SIDE);
        MB_ASSERT(im.stride >= im.width && im.pixels != NULL);
        unsigned sum = 0;
        for (int y = 0; y < im.height; y++)
            for (int x = 0; x < im.width; x++)
                sum += im.pixels[(size_t)y * (size_t)im.stride + (size_t)x];
        MB_ASSERT(sum <= 255u * (unsigned)im.width * (unsigned)im.height);
        mb_image_free(&im);
    } else {
        MB_ASSERT(rc == MB_EFORMAT || rc == MB_ERANGE || rc == MB_ENOMEM);
        MB_ASSERT(im.pixels == NULL && err[0] != '\0');
    }
    return 0;
}
