/* doubletty merge — join the CSV outputs of `doubletty fit --shard K/N` runs
 * into the table a single run would have written, byte for byte.
 *
 * Every row of a fit table starts with the index of its input, and every
 * shard writes its rows in increasing index order, so the shards are merged
 * like sorted runs: always take the rows of the smallest index next.  Only
 * one line per shard is held in memory, whatever the size of the survey.
 *
 * The merge checks what it can: the headers must be identical, an index may
 * come from one shard only, indices must follow on without gaps (every input
 * of a fit run yields at least one row, failed ones included, so a gap means
 * a shard output is missing), optionally the number of inputs (--expect),
 * and a last line without its newline (a shard that died while writing).
 * With -o the table is written to a temporary file renamed into place only
 * when everything checked out. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"
#include "commands.h"

typedef struct {
  const char *path;
  FILE *f;
  char *line;
  size_t cap;
  ssize_t len;
  long lineno;
  long index;        /* of the current line; -1 at the end */
} shard;

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty merge [-o FILE] [--expect N] SHARD.csv...\n"
          "Join the outputs of 'doubletty fit --shard K/N' into one table in input\n"
          "order (identical to a single run).  --expect N: the run had N inputs.\n");
}

/* Read the next data line of s; sets s->index (-1 at the end).  Returns 0,
 * or 1 after printing a message. */
static int advance(shard *s) {
  long prev = s->index;
  s->len = getline(&s->line, &s->cap, s->f);
  if (s->len < 0) {
    if (ferror(s->f)) {
      cli_errorf("%s: read error: %s", s->path, strerror(errno));
      return 1;
    }
    s->index = -1;
    return 0;
  }
  s->lineno++;
  if (s->line[s->len - 1] != '\n') {
    cli_errorf("%s: line %ld: incomplete last line (no newline): was the output cut off?",
               s->path, s->lineno);
    return 1;
  }
  char *end;
  errno = 0;
  long idx = strtol(s->line, &end, 10);
  if (end == s->line || *end != ',' || idx < 0 || errno == ERANGE || s->line[0] == '-' ||
      s->line[0] == '+' || s->line[0] == ' ') {
    cli_errorf("%s: line %ld: the first field is not an input index", s->path, s->lineno);
    return 1;
  }
  if (prev >= 0 && idx < prev) {
    cli_errorf("%s: line %ld: index %ld after %ld: rows are not in input order", s->path,
               s->lineno, idx, prev);
    return 1;
  }
  s->index = idx;
  return 0;
}

int cmd_merge(int argc, char **argv) {
  const char *out_path = NULL;
  long expect = -1;
  int rc = 1;
  shard *sh = calloc((size_t)argc, sizeof *sh);
  size_t n = 0;
  FILE *out = NULL;
  char *tmp_path = NULL;
  char *header = NULL;
  if (!sh) {
    cli_errorf("out of memory");
    return 2;
  }
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
      usage(stdout);
      free(sh);
      return 0;
    } else if (!strcmp(a, "-o") || !strcmp(a, "--output")) {
      if (i + 1 >= argc) {
        cli_errorf("%s needs a value", a);
        rc = 2;
        goto done;
      }
      out_path = argv[++i];
    } else if (!strcmp(a, "--expect")) {
      if (i + 1 >= argc) {
        cli_errorf("--expect needs a value");
        rc = 2;
        goto done;
      }
      if (cli_parse_long("--expect", argv[++i], &expect)) {
        rc = 2;
        goto done;
      }
      if (expect < 0) {
        cli_errorf("--expect: %ld is not a number of inputs", expect);
        rc = 2;
        goto done;
      }
    } else if (a[0] == '-' && a[1] != '\0') {
      cli_errorf("merge: unknown option '%s' (see doubletty merge --help)", a);
      rc = 2;
      goto done;
    } else {
      sh[n].path = a;
      sh[n].index = -1;
      n++;
    }
  }
  if (n == 0) {
    cli_errorf("merge: no shard output given");
    usage(stderr);
    rc = 2;
    goto done;
  }
  if (out_path && strcmp(out_path, "-"))
    for (size_t k = 0; k < n; k++)
      if (!strcmp(out_path, sh[k].path)) {
        cli_errorf("merge: the output %s is also an input", out_path);
        rc = 2;
        goto done;
      }

  /* open every shard and compare the headers */
  for (size_t k = 0; k < n; k++) {
    sh[k].f = fopen(sh[k].path, "r");
    if (!sh[k].f) {
      cli_errorf("%s: cannot open: %s", sh[k].path, strerror(errno));
      goto done;
    }
    sh[k].len = getline(&sh[k].line, &sh[k].cap, sh[k].f);
    sh[k].lineno = 1;
    if (sh[k].len <= 0 || sh[k].line[sh[k].len - 1] != '\n') {
      cli_errorf("%s: line 1: no header line: not the output of doubletty fit", sh[k].path);
      goto done;
    }
    if (k == 0) {
      if (strncmp(sh[0].line, "index,", 6)) {
        cli_errorf("%s: line 1: the header does not start with 'index': not the output "
                   "of doubletty fit",
                   sh[0].path);
        goto done;
      }
      header = strdup(sh[0].line);
      if (!header) {
        cli_errorf("out of memory");
        goto done;
      }
    } else if (strcmp(sh[k].line, header)) {
      cli_errorf("%s: line 1: the header differs from that of %s", sh[k].path, sh[0].path);
      goto done;
    }
    if (advance(&sh[k])) goto done;
  }

  if (out_path && strcmp(out_path, "-")) {
    size_t len = strlen(out_path) + 32;
    tmp_path = malloc(len);
    if (!tmp_path) {
      cli_errorf("out of memory");
      goto done;
    }
    snprintf(tmp_path, len, "%s.tmp%ld", out_path, (long)getpid());
    out = fopen(tmp_path, "w");
    if (!out) {
      cli_errorf("%s: cannot write: %s", out_path, strerror(errno));
      free(tmp_path);
      tmp_path = NULL;
      goto done;
    }
  } else {
    out = stdout;
  }
  fputs(header, out);

  long last = -1;
  for (;;) {
    size_t best = n;
    for (size_t k = 0; k < n; k++)
      if (sh[k].index >= 0 && (best == n || sh[k].index < sh[best].index)) best = k;
    if (best == n) break;
    long idx = sh[best].index;
    for (size_t k = 0; k < n; k++)
      if (k != best && sh[k].index == idx) {
        cli_errorf("input %ld appears in both %s (line %ld) and %s (line %ld): the same "
                   "shard given twice?",
                   idx, sh[best].path, sh[best].lineno, sh[k].path, sh[k].lineno);
        goto done;
      }
    if (idx != last + 1) {
      if (idx - 1 == last + 1)
        cli_errorf("input %ld is missing from every shard output (a shard missing, or "
                   "rows out of order?)",
                   last + 1);
      else
        cli_errorf("inputs %ld to %ld are missing from every shard output (a shard missing, "
                   "or rows out of order?)",
                   last + 1, idx - 1);
      goto done;
    }
    while (sh[best].index == idx) {
      fwrite(sh[best].line, 1, (size_t)sh[best].len, out);
      if (advance(&sh[best])) goto done;
    }
    last = idx;
  }
  if (expect >= 0 && last + 1 != expect) {
    cli_errorf("merge: %ld inputs found, %ld expected: a shard missing?", last + 1, expect);
    goto done;
  }
  if (fflush(out) != 0 || ferror(out)) {
    cli_errorf("%s: write error", out_path && out != stdout ? out_path : "standard output");
    goto done;
  }
  if (out != stdout) {
    int bad = fclose(out) != 0;
    out = NULL;
    if (bad || rename(tmp_path, out_path) != 0) {
      cli_errorf("%s: cannot write: %s", out_path, strerror(errno));
      goto done;
    }
    free(tmp_path);
    tmp_path = NULL;
  }
  rc = 0;
done:
  if (out && out != stdout) fclose(out);
  if (tmp_path) {
    remove(tmp_path);
    free(tmp_path);
  }
  for (size_t k = 0; k < n; k++) {
    if (sh[k].f) fclose(sh[k].f);
    free(sh[k].line);
  }
  free(header);
  free(sh);
  return rc;
}
