/* Fuzz target: the session-file reader (record parser and replay).
 *
 * The input is the content of a session file.  It goes through the
 * line-by-line record reader and through the replay into per-spectrum
 * states (dt_journal_open_mem, read-only), and every record that parses is
 * written back with dt_journal_format: that line must parse again and
 * write back to the very same line (the format reads back exactly).
 *
 * Each line ends in a check sum of its bytes, so almost every change the
 * fuzzer makes would only ever reach the "check sum does not match" branch.
 * The input is therefore read twice: as it is, and with the sum of every
 * line that has one recomputed (FNV-1a, 32 bit: offset basis 2166136261,
 * prime 16777619, the published FNV parameters), which lets changes reach
 * the field parser and the replay. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/journal.h"

static uint32_t fnv1a32(const unsigned char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) {
    h ^= p[i];
    h *= 16777619u;
  }
  return h;
}

/* Rewrite "<TAB>sum=XXXXXXXX" at the end of each line to match the line. */
static void fix_sums(unsigned char *buf, size_t len) {
  size_t start = 0;
  while (start < len) {
    unsigned char *nl = memchr(buf + start, '\n', len - start);
    size_t end = nl ? (size_t)(nl - buf) : len;
    if (end - start >= 13 && !memcmp(buf + end - 13, "\tsum=", 5)) {
      char hex[9];
      snprintf(hex, sizeof hex, "%08x", (unsigned)fnv1a32(buf + start, end - 13 - start));
      memcpy(buf + end - 8, hex, 8);
    }
    start = end + 1;
  }
}

/* Write a record into *buf (grown as needed); the line's length. */
static size_t format_rec(char **buf, size_t *cap, const dt_journal_record *r) {
  for (;;) {
    size_t n = dt_journal_format(*buf, *cap, r->time, r->user, &r->target, &r->action,
                                 &r->after, (r->has & DT_REC_MEAS) ? &r->meas : NULL,
                                 (r->has & DT_REC_FULL) != 0,
                                 r->sha256_was[0] ? r->sha256_was : NULL);
    if (n < *cap) return n;
    char *p = realloc(*buf, n + 1);
    if (!p) abort();
    *buf = p;
    *cap = n + 1;
  }
}

/* A record written back must read back and write back identically. */
static void round_trip(const dt_journal_record *rec) {
  static char *line1, *line2;
  static size_t cap1, cap2;
  static dt_journal_record again;
  dt_err e;
  size_t n1 = format_rec(&line1, &cap1, rec);
  char *copy = malloc(n1 + 1);
  if (!copy) abort();
  memcpy(copy, line1, n1 + 1);
  if (dt_journal_parse(copy, &again, &e) != DT_OK) {
    fprintf(stderr, "written line does not read back (%s):\n%s", e.what, line1);
    __builtin_trap();
  }
  size_t n2 = format_rec(&line2, &cap2, &again);
  if (n1 != n2 || memcmp(line1, line2, n1) != 0) {
    fprintf(stderr, "written line changes on reading back:\n%s%s", line1, line2);
    __builtin_trap();
  }
  free(copy);
}

static void read_records(const unsigned char *buf, size_t len) {
  dt_journal_reader *r;
  dt_err e;
  if (dt_journal_reader_open_mem(buf, len, &r, &e) != DT_OK) return;
  static dt_journal_record rec;
  for (int guard = 0; guard < 100000; guard++) {
    int rc = dt_journal_reader_next(r, &rec, &e);
    if (rc == DT_OK) {
      if (dt_journal_reader_version(r) < 1) __builtin_trap();
      round_trip(&rec);
    } else if (rc != DT_EFORMAT) {
      break;
    }
  }
  dt_journal_reader_close(r);
}

static void replay(const unsigned char *buf, size_t len) {
  dt_journal *j;
  dt_err e;
  if (dt_journal_open_mem(buf, len, &j, &e) != DT_OK) {
    if (!e.what[0]) __builtin_trap();
    return;
  }
  size_t n = dt_journal_count(j);
  for (size_t i = 0; i < n; i++) {
    const dt_journal_entry *en = dt_journal_entry_at(j, i);
    /* a spectrum is found by its identity (digest, HDU, row, doublet), and
     * one without a digest by its path */
    if (!en || dt_journal_find(j, &en->target) != en) __builtin_trap();
    if (!en->target.sha256[0] &&
        dt_journal_lookup(j, en->target.path, en->target.hdu, en->target.row) != en)
      __builtin_trap();
    if (en->nchanges < 1 || en->first_line > en->last_line) __builtin_trap();
  }
  size_t nw = dt_journal_warning_count(j);
  for (size_t i = 0; i < nw && i < 64; i++)
    if (!dt_journal_warning(j, i)) __builtin_trap();
  dt_journal_close(j);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  unsigned char *fixed = malloc(size ? size : 1);
  if (!fixed) return 0;
  memcpy(fixed, data, size);
  fix_sums(fixed, size);
  read_records(data, size);
  replay(data, size);
  if (memcmp(fixed, data, size) != 0) {
    read_records(fixed, size);
    replay(fixed, size);
  }
  free(fixed);
  return 0;
}
