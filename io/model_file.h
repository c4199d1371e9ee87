/*
 * io/model_file.h - the model file: a JSON document (cJSON) a person can read.
 *
 * Layout (version 1):
 *   {
 *     "format": "modeband-model",
 *     "version": 1,
 *     "checksum": "crc32:xxxxxxxx",      CRC-32 (zlib) of the payload, see below
 *     "payload": {
 *       "training": { "samples", "gpa_iterations", "gpa_converged",
 *                     "variance_fraction", "fixed_modes", "created", "source" },
 *       "layout":   { "outlines": [n0, n1, ...] },   points per outline
 *       "shape":    { "dim", "modes", "mean": [...d],
 *                     "eigenvalues": [...n_eig],  largest first; first k kept
 *                     "vectors": [[...d], ...k] } one array per mode
 *     }
 *   }
 * The checksum covers the payload object as cJSON prints it compactly
 * (cJSON_PrintUnformatted) after parsing, so re-indenting the file does not
 * break it while any change of a value does. Doubles are printed with up to
 * 17 significant digits, so a save/load round trip is bit-exact.
 * Later issues add members to the payload (profiles, bands, gauges); a
 * reader refuses versions it does not know.
 */
#ifndef MB_MODEL_FILE_H
#define MB_MODEL_FILE_H

#include <stddef.h>

#include "part_model.h"
#include "shape_model.h"

#define MB_MODEL_FORMAT "modeband-model"
#define MB_MODEL_VERSION 1

/**
 * Write the model to path (written to path.tmp, fsync'd, then renamed, so a
 * crash never leaves half a model).
 * Return value: 0; MB_EINVAL; MB_EIO; MB_ENUMERIC (a value of the model is
 * not finite); MB_ENOMEM. err names the file.
 */
int mb_model_save(const char *path, const mb_shape_model *m, char *err);

/**
 * Read a model. Refuses (with a sentence naming the file and the field):
 * unreadable file (MB_EIO / MB_ENOTFOUND), malformed JSON or a missing or
 * mistyped field (MB_EFORMAT), another format or unknown version
 * (MB_EVERSION), checksum mismatch (MB_ECHECKSUM), arrays of the wrong size
 * (MB_ESIZE), NaN/inf or null where a number belongs (MB_ENUMERIC); values
 * the model itself refuses (eigenvalues unsorted, modes not orthonormal)
 * with the code mb_shape_model_create gives. Also MB_ENOMEM.
 */
int mb_model_load(const char *path, mb_shape_model **out, char *err);

/** The same from a buffer; `name` is used in error sentences. */
int mb_model_parse(const char *text, size_t len, const char *name,
                   mb_shape_model **out, char *err);

/**
 * The text mb_model_save writes (checksum included), into a malloc'd,
 * NUL-terminated buffer *text of *len bytes that the caller frees.
 * Return value: 0; MB_EINVAL; MB_ENUMERIC (a value of the model is not
 * finite); MB_ENOMEM.
 */
int mb_model_print(const mb_shape_model *m, char **text, size_t *len,
                   char *err);

/*
 * Part models: the same document with the part sections (io/part_sections.h:
 * "part", "imaging", "limits", "profiles") in the payload, all covered by
 * the checksum. mb_model_load reads the shape model of such a file too.
 */

/** Write a part model (pm->shape required). Codes as mb_model_save. */
int mb_part_model_save(const char *path, const mb_part_model *pm, char *err);

/** The text mb_part_model_save writes. Codes as mb_model_print. */
int mb_part_model_print(const mb_part_model *pm, char **text, size_t *len,
                        char *err);

/**
 * Read a part model into *pm (free with mb_part_model_free). Codes as
 * mb_model_load, plus those of the sections' readers; on failure *pm is
 * zeroed.
 */
int mb_part_model_load(const char *path, mb_part_model *pm, char *err);

/** The same from a buffer; `name` is used in error sentences. */
int mb_part_model_parse(const char *text, size_t len, const char *name,
                        mb_part_model *pm, char *err);

#endif
