/* tests/io/model_stamp.c - see model_stamp.h. */
#include "model_stamp.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zlib.h>

char *mb_test_model_stamp(cJSON *root, int upper)
{
    char *text = cJSON_PrintUnformatted(root), *payload_text = NULL;
    char *out = NULL;
    cJSON *reread = text ? cJSON_Parse(text) : NULL;
    cJSON *payload = cJSON_GetObjectItemCaseSensitive(reread, "payload");
    if (!cJSON_IsObject(payload))
        goto done;
    if (!(payload_text = cJSON_PrintUnformatted(payload)))
        goto done;
    unsigned long crc =
        crc32(0L, (const Bytef *)payload_text, (uInt)strlen(payload_text));
    char sum[32];
    snprintf(sum, sizeof sum, upper ? "crc32:%08lX" : "crc32:%08lx", crc);
    cJSON *item = cJSON_CreateString(sum);
    if (!item)
        goto done;
    int placed =
        cJSON_GetObjectItemCaseSensitive(root, "checksum")
            ? cJSON_ReplaceItemInObjectCaseSensitive(root, "checksum", item)
            : cJSON_AddItemToObject(root, "checksum", item);
    if (!placed) {
        cJSON_Delete(item);
        goto done;
    }
    char *pretty = cJSON_Print(root);
    if (pretty) {
        out = malloc(strlen(pretty) + 1);
        if (out)
            strcpy(out, pretty);
        cJSON_free(pretty);
    }
done:
    cJSON_free(text);
    cJSON_free(payload_text);
    cJSON_Delete(reread);
    return out;
}
