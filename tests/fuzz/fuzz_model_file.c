/*
 * tests/fuzz/fuzz_model_file.c - libFuzzer target for the model-file
 * parser (mb_model_parse).
 *
 * Each input is parsed as it is, and again with its checksum re-stamped
 * (tests/io/model_stamp.c) so that mutations reach the field checks behind
 * the checksum. Properties checked besides "no crash, no leak, no UB":
 * a refusal leaves no model and a sentence; an accepted model prints
 * (mb_model_print) to a text that parses back to the same bits.
 */
#include "error.h"
#include "model_file.h"
#include "model_stamp.h"
#include "shape_model.h"

#include <cjson/cJSON.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void same_bits(const void *a, const void *b, size_t n)
{
    MB_ASSERT(memcmp(a, b, n) == 0);
}

static void check_reprint(const mb_shape_model *m)
{
    char *text = NULL, err[MB_ERR_LEN];
    size_t len = 0;
    mb_shape_model *back = NULL;
    MB_ASSERT(mb_model_print(m, &text, &len, err) == 0);
    MB_ASSERT(mb_model_parse(text, len, "reprint", &back, err) == 0);
    size_t d = (size_t)mb_shape_model_dim(m);
    size_t k = (size_t)mb_shape_model_n_modes(m);
    size_t ne = (size_t)mb_shape_model_n_eig(m);
    MB_ASSERT(mb_shape_model_dim(back) == (int)d);
    MB_ASSERT(mb_shape_model_n_modes(back) == (int)k);
    MB_ASSERT(mb_shape_model_n_eig(back) == (int)ne);
    same_bits(mb_shape_model_layout(m), mb_shape_model_layout(back),
              sizeof(mb_layout));
    same_bits(mb_shape_model_mean(m), mb_shape_model_mean(back),
              d * sizeof(double));
    same_bits(mb_shape_model_modes(m), mb_shape_model_modes(back),
              d * k * sizeof(double));
    same_bits(mb_shape_model_eig(m), mb_shape_model_eig(back),
              ne * sizeof(double));
    mb_shape_model_close(back);
    free(text);
}

static void parse_one(const char *text, size_t len)
{
    char err[MB_ERR_LEN] = "";
    mb_shape_model *m = NULL;
    int rc = mb_model_parse(text, len, "fuzz.json", &m, err);
    if (rc == 0) {
        MB_ASSERT(m != NULL);
        check_reprint(m);
    } else {
        MB_ASSERT(m == NULL && rc < 0 && rc >= MB_ECODE_MIN);
        MB_ASSERT(strncmp(err, "fuzz.json: ", 11) == 0);
    }
    mb_shape_model_close(m);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    parse_one((const char *)data, size);
    /* cJSON wants a terminated buffer; the fuzzer's has none. */
    char *copy = malloc(size + 1);
    if (!copy)
        return 0;
    memcpy(copy, data, size);
    copy[size] = '\0';
    cJSON *root = cJSON_Parse(copy);
    if (cJSON_IsObject(root)) {
        char *stamped = mb_test_model_stamp(root, 0);
        if (stamped) {
            parse_one(stamped, strlen(stamped));
            free(stamped);
        }
    }
    cJSON_Delete(root);
    free(copy);
    return 0;
}
