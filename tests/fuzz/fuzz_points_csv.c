/* tests/fuzz/fuzz_points_csv.c - libFuzzer target for CSV point files. */
#include "fuzz_points_common.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    fuzz_points(data, size, 1);
    return 0;
}
