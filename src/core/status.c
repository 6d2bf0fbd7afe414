/* Status codes and the error-detail record filled by the core. */
#include "doubletty/status.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

const char *dt_status_str(int code) {
  switch (code) {
  case DT_OK: return "success";
  case DT_ENOMEM: return "out of memory";
  case DT_EIO: return "input/output error";
  case DT_EFORMAT: return "malformed input";
  case DT_ENOWCS: return "no wavelength solution";
  case DT_ERANGE: return "not covered";
  case DT_EMASKED: return "all pixels masked";
  case DT_EINVAL: return "invalid argument";
  case DT_ENOCONV: return "did not converge";
  case DT_ELOCK: return "locked";
  case DT_EVERSION: return "unsupported version";
  case DT_ENOTFOUND: return "not found";
  default: return "unknown error";
  }
}

int dt_err_set(dt_err *e, int code, const char *where, const char *fmt, ...) {
  if (e) {
    e->code = code;
    snprintf(e->where, sizeof e->where, "%s", where ? where : "");
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(e->what, sizeof e->what, fmt, ap);
    va_end(ap);
  }
  return code;
}

void dt_err_clear(dt_err *e) {
  if (e) {
    e->code = DT_OK;
    e->where[0] = '\0';
    e->what[0] = '\0';
  }
}
