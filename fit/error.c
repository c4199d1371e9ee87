/* fit/error.c - result code phrases and the error-buffer helper. */
#include "error.h"

#include <stdarg.h>

const char *mb_strerror(int code)
{
    switch (code) {
    case MB_OK: return "success";
    case MB_EINVAL: return "invalid argument";
    case MB_ENOMEM: return "out of memory";
    case MB_EIO: return "input/output error";
    case MB_EFORMAT: return "malformed input";
    case MB_EVERSION: return "unsupported format or version";
    case MB_ECHECKSUM: return "checksum mismatch";
    case MB_ENUMERIC: return "numerical error (NaN, infinity or failed routine)";
    case MB_EDEGENERATE: return "degenerate data";
    case MB_ENOCONV: return "did not converge";
    case MB_ENOPART: return "no part found";
    case MB_ETIMEOUT: return "timed out";
    case MB_ENODEV: return "device gone";
    case MB_ESIZE: return "sizes do not match";
    case MB_ERANGE: return "value out of range";
    case MB_ENOTFOUND: return "not found";
    case MB_EEDGE: return "part touches the frame edge";
    case MB_EMULTIPLE: return "more than one part in view";
    default: return "unknown error code";
    }
}

int mb_err_set(char *err, int code, const char *fmt, ...)
{
    if (err) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(err, MB_ERR_LEN, fmt, ap);
        va_end(ap);
    }
    return code;
}
