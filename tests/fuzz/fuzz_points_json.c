/* tests/fuzz/fuzz_points_json.c - libFuzzer target for JSON point files. */
#include "fuzz_points_common.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    fuzz_points(data, size, 0);
    return 0;
}
