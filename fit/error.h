/*
 * fit/error.h - result codes, the caller's error buffer and the always-on
 * assertion shared by every room of modeband.
 *
 * Every fallible function returns 0 (MB_OK) or one of the negative MB_E...
 * codes below. Functions at a boundary (files, documents, devices, sockets)
 * also take a caller-owned buffer `char err[MB_ERR_LEN]` and write one plain
 * sentence into it naming the file, the field and what was expected. The
 * buffer may be NULL; it is always NUL-terminated when not NULL.
 *
 * Outcomes are kept apart on purpose: "no part in view", "did not converge"
 * and "internal error" are different codes so that no caller can mistake a
 * fault for a result.
 */
#ifndef MB_ERROR_H
#define MB_ERROR_H

#include <stdio.h>
#include <stdlib.h>

/** Size of a caller-owned error buffer, in bytes. */
#define MB_ERR_LEN 512

enum {
    MB_OK = 0,
    MB_EINVAL = -1,      /**< invalid argument (programming or usage error) */
    MB_ENOMEM = -2,      /**< out of memory */
    MB_EIO = -3,         /**< file or device input/output failed */
    MB_EFORMAT = -4,     /**< malformed file, document or message */
    MB_EVERSION = -5,    /**< unsupported format or version */
    MB_ECHECKSUM = -6,   /**< checksum does not match the payload */
    MB_ENUMERIC = -7,    /**< NaN/inf in input, or a numerical routine failed */
    MB_EDEGENERATE = -8, /**< degenerate data: zero-size shape, too few samples */
    MB_ENOCONV = -9,     /**< an iterative method did not converge */
    MB_ENOPART = -10,    /**< no part found in the image */
    MB_ETIMEOUT = -11,   /**< timed out */
    MB_ENODEV = -12,     /**< device gone (camera unplugged, peer lost) */
    MB_ESIZE = -13,      /**< sizes do not match (points, outlines, frames) */
    MB_ERANGE = -14,     /**< value outside its allowed range */
    MB_ENOTFOUND = -15,  /**< file or item not found */
    MB_EEDGE = -16,      /**< the part touches the frame edge (cut by it) */
    MB_EMULTIPLE = -17,  /**< more than one part in view */
    MB_ECODE_MIN = -17
};

/** One English phrase for a result code; never NULL. */
const char *mb_strerror(int code);

/**
 * Write a formatted sentence into err (size MB_ERR_LEN). NULL-safe: does
 * nothing when err is NULL. Returns `code` so callers can write
 * `return mb_err_set(err, MB_EFORMAT, "...", ...);`.
 */
int mb_err_set(char *err, int code, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

/**
 * Always-on assertion for invariants only (never for input checking, never
 * with side effects inside). Stays on in release builds: a broken invariant
 * in an inspection tool must stop it, not let it call a part good.
 */
#define MB_ASSERT(cond)                                                        \
    do {                                                                       \
        if (!(cond)) {                                                         \
            fprintf(stderr, "modeband: internal error: %s:%d: %s\n", __FILE__, \
                    __LINE__, #cond);                                          \
            abort();                                                           \
        }                                                                      \
    } while (0)

#endif
