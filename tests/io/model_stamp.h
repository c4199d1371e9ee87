/*
 * tests/io/model_stamp.h - re-stamp the checksum of a model document after a
 * test (or the fuzzer) has edited its payload, so the edit reaches the field
 * checks behind the checksum. Written from the rule in io/model_file.h, not
 * from the loader's code: CRC-32 (zlib crc32) of the payload as
 * cJSON_PrintUnformatted prints it after parsing.
 */
#ifndef MB_TEST_MODEL_STAMP_H
#define MB_TEST_MODEL_STAMP_H

#include <cjson/cJSON.h>

/**
 * Print root (which may hold raw items such as "1e999") and set its
 * "checksum" member to "crc32:" plus the payload's CRC in lower-case hex
 * (upper-case when upper != 0). Returns the formatted text (free with
 * free()), or NULL when root has no object "payload" or memory ran out.
 */
char *mb_test_model_stamp(cJSON *root, int upper);

#endif
