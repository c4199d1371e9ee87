/*
 * tests/fuzz/fuzz_calib_file.c - libFuzzer target for the calibration
 * document parser (mb_calib_file_parse, io/calib_file.h).
 *
 * Properties checked besides "no crash, no leak, no UB": a refusal comes
 * with a negative code of the documented set, a sentence that starts with
 * the document's name, and a zeroed result; an accepted document passes
 * mb_calib_validate, converts the frame centre to mm and back, and prints
 * and reads back to the same values bit for bit.
 */
#include "calib_file.h"
#include "camera.h"
#include "error.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    mb_calib cal, again;
    char err[MB_ERR_LEN] = "";
    int rc =
        mb_calib_file_parse((const char *)data, size, "fuzz.json", &cal, err);
    if (rc < 0) {
        MB_ASSERT(rc == MB_EFORMAT || rc == MB_EVERSION || rc == MB_ENUMERIC ||
                  rc == MB_ERANGE || rc == MB_ENOMEM || rc == MB_ESIZE);
        MB_ASSERT(strncmp(err, "fuzz.json: ", 11) == 0);
        MB_ASSERT(cal.width == 0 && cal.h[8] == 0.0);
        return 0;
    }
    MB_ASSERT(rc == 0);
    MB_ASSERT(mb_calib_validate(&cal, err) == 0);
    double X, Y, x, y;
    if (mb_calib_px_to_mm(&cal, cal.cx, cal.cy, &X, &Y) == 0 &&
        mb_calib_mm_to_px(&cal, X, Y, &x, &y) == 0)
        MB_ASSERT(fabs(x - cal.cx) < 1e-3 * cal.radius &&
                  fabs(y - cal.cy) < 1e-3 * cal.radius);
    char *text = NULL;
    size_t len = 0;
    MB_ASSERT(mb_calib_file_print(&cal, &text, &len, err) == 0);
    MB_ASSERT(mb_calib_file_parse(text, len, "again", &again, err) == 0);
    free(text);
    MB_ASSERT(memcmp(cal.h, again.h, sizeof cal.h) == 0);
    MB_ASSERT(memcmp(&cal.k1, &again.k1, sizeof cal.k1) == 0);
    MB_ASSERT(memcmp(&cal.p2, &again.p2, sizeof cal.p2) == 0);
    MB_ASSERT(cal.width == again.width && cal.n_frames == again.n_frames);
    return 0;
}
