/* The inspector's queue (see queue.h): compact entries in a string pool. */
#include "queue.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/spectrum.h"

void dt_queue_init(dt_queue *q) {
  memset(q, 0, sizeof *q);
  if (!getcwd(q->cwd, sizeof q->cwd)) q->cwd[0] = '\0';
}

void dt_queue_free(dt_queue *q) {
  free(q->e);
  free(q->pool);
  memset(q, 0, sizeof *q);
}

static int pool_add(dt_queue *q, const char *s, size_t *off) {
  size_t k = strlen(s) + 1;
  if (q->pool_len + k > q->pool_cap) {
    size_t cap = q->pool_cap ? q->pool_cap : 4096;
    while (cap < q->pool_len + k) cap *= 2;
    char *p = realloc(q->pool, cap);
    if (!p) return DT_ENOMEM;
    q->pool = p;
    q->pool_cap = cap;
  }
  memcpy(q->pool + q->pool_len, s, k);
  *off = q->pool_len;
  q->pool_len += k;
  return DT_OK;
}

const char *dt_queue_canonical(const char *cwd, const char *path, char *out, size_t size) {
  char buf[8192];
  if (path[0] == '/' || !cwd || !cwd[0]) snprintf(buf, sizeof buf, "%s", path);
  else snprintf(buf, sizeof buf, "%s/%s", cwd, path);
  /* Walk the components, dropping "" and "." and resolving ".." lexically.
   * A FITS selector "[...]" stays attached to the last component. */
  size_t n = 0;
  int absolute = buf[0] == '/';
  char *save = NULL;
  out[0] = '\0';
  if (size < 2) return out;
  if (absolute) out[n++] = '/';
  for (char *c = strtok_r(buf, "/", &save); c; c = strtok_r(NULL, "/", &save)) {
    if (!strcmp(c, ".")) continue;
    if (!strcmp(c, "..")) {
      if (n > (size_t)absolute) {
        while (n > (size_t)absolute && out[n - 1] != '/') n--;
        if (n > (size_t)absolute) n--; /* the slash */
        out[n] = '\0';
        continue;
      }
      if (absolute) continue; /* "/.." is "/" */
    }
    size_t k = strlen(c);
    int slash = n > 0 && out[n - 1] != '/';
    if (n + (size_t)slash + k + 1 > size) {
      out[0] = '\0';
      return out;
    }
    if (slash) out[n++] = '/';
    memcpy(out + n, c, k);
    n += k;
    out[n] = '\0';
  }
  if (n == 0) snprintf(out, size, ".");
  return out;
}

int dt_queue_add(dt_queue *q, const dt_target_spec *t, dt_err *e) {
  if (q->n == q->cap) {
    size_t cap = q->cap ? 2 * q->cap : 64;
    dt_qentry *ne = realloc(q->e, cap * sizeof *ne);
    if (!ne) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    q->e = ne;
    q->cap = cap;
  }
  dt_qentry *x = &q->e[q->n];
  memset(x, 0, sizeof *x);
  char key[8192];
  dt_queue_canonical(q->cwd, t->path, key, sizeof key);
  char sys[1024] = "";
  {
    dt_system_set us;
    memset(&us, 0, sizeof us);
    const dt_system_opts *so = &t->systems;
    if (so->has_target) {
      snprintf(us.sys[0].name, sizeof us.sys[0].name, "target");
      us.sys[0].vlo = so->target_vlo;
      us.sys[0].vhi = so->target_vhi;
      us.n = 1;
    }
    for (size_t k = 0; k < so->nextra && us.n < DT_MAX_SYSTEMS; k++) us.sys[us.n++] = so->extra[k];
    dt_systems_format(&us, sys, sizeof sys);
  }
  if (pool_add(q, t->path, &x->path) || pool_add(q, key[0] ? key : t->path, &x->key) ||
      pool_add(q, t->name, &x->name) || pool_add(q, sys, &x->systems) ||
      pool_add(q, t->res_text, &x->res_text))
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  x->row = t->row;
  x->line = t->line;
  x->vsys = t->vsys;
  x->has_vsys = (unsigned char)t->has_vsys;
  x->air = (unsigned char)(t->air || q->air);
  x->has_window = (unsigned char)t->has_window;
  x->covering = (signed char)(t->has_covering ? t->covering : -1);
  x->has_pos = (unsigned char)t->has_pos;
  x->ra = t->ra;
  x->dec = t->dec;
  x->frame = (signed char)t->frame;
  x->hyperfine = (unsigned char)(t->hyperfine != 0);
  x->vlo = t->vlo;
  x->vhi = t->vhi;
  x->resolution = t->resolution;
  x->fwhm_kms = t->fwhm_kms;
  x->res_is_fwhm = (unsigned char)t->res_is_fwhm;
  memcpy(x->doublet, t->doublet, sizeof x->doublet);
  x->verdict = -1;
  q->n++;
  return DT_OK;
}

int dt_queue_add_file(dt_queue *q, const char *path, dt_err *e) {
  dt_target_spec t;
  dt_target_spec_init(&t, path);
  long count = 0;
  dt_err ce;
  if (dt_spectrum_count(path, NULL, &count, &ce) == DT_OK && count > 1) {
    /* a table of many spectra: one entry per row */
    for (long r = 1; r <= count; r++) {
      t.row = r;
      int rc = dt_queue_add(q, &t, e);
      if (rc) return rc;
    }
    return DT_OK;
  }
  return dt_queue_add(q, &t, e);
}

int dt_queue_add_list(dt_queue *q, const char *list, size_t *nbad,
                      void (*report)(const char *list, const dt_err *e), dt_err *e) {
  dt_targets *l;
  *nbad = 0;
  int rc = dt_targets_open(list, &l, e);
  if (rc) return rc;
  dt_target_spec *t = malloc(sizeof *t);
  if (!t) {
    dt_targets_close(l);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  for (;;) {
    int got = 0;
    dt_err le;
    dt_err_clear(&le);
    rc = dt_targets_next(l, t, &got, &le);
    if (rc == DT_EFORMAT) {
      (*nbad)++;
      if (report) report(list, &le);
      continue;
    }
    if (rc != DT_OK) {
      if (e) *e = le;
      break;
    }
    if (!got) break;
    rc = dt_queue_add(q, t, e);
    if (rc) break;
  }
  free(t);
  dt_targets_close(l);
  return rc;
}

const char *dt_queue_path(const dt_queue *q, size_t i) { return q->pool + q->e[i].path; }
const char *dt_queue_key(const dt_queue *q, size_t i) { return q->pool + q->e[i].key; }
const char *dt_queue_name(const dt_queue *q, size_t i) { return q->pool + q->e[i].name; }

void dt_queue_resolution(const dt_queue *q, size_t i, const char *doublet, double *R, double *fwhm) {
  dt_target_spec t;
  memset(&t, 0, sizeof t);
  t.resolution = q->e[i].resolution;
  t.fwhm_kms = q->e[i].fwhm_kms;
  snprintf(t.res_text, sizeof t.res_text, "%s", q->pool + q->e[i].res_text);
  t.res_is_fwhm = q->e[i].res_is_fwhm;
  dt_target_resolution(&t, doublet, R, fwhm);
}

void dt_queue_systems(const dt_queue *q, size_t i, dt_system_opts *o) {
  char buf[1024];
  snprintf(buf, sizeof buf, "%s", q->pool + q->e[i].systems);
  char *save = NULL;
  for (char *tok = strtok_r(buf, ";", &save); tok; tok = strtok_r(NULL, ";", &save)) {
    dt_system y;
    dt_err e;
    if (dt_system_parse(tok, &y, &e) != DT_OK) continue; /* checked when the list was read */
    if (!strcmp(y.name, DT_SYSTEM_TARGET)) {
      o->has_target = 1;
      o->target_vlo = y.vlo;
      o->target_vhi = y.vhi;
    } else {
      dt_system_opts_add(o, &y, &e);
    }
  }
}

void dt_queue_split_key(const char *key, char *path, size_t npath, char *doublet, size_t ndoublet) {
  const char *slash = strrchr(key, '/');
  const char *hash = strrchr(slash ? slash : key, '#');
  if (!hash) {
    snprintf(path, npath, "%s", key);
    if (ndoublet) doublet[0] = '\0';
    return;
  }
  snprintf(path, npath, "%.*s", (int)(hash - key), key);
  snprintf(doublet, ndoublet, "%s", hash + 1);
}
