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
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"
#include "commands.h"
#include "outfile.h"

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
          "usage: doubletty merge [-o FILE [--force]] [--expect N] SHARD.csv...\n"
          "Join the outputs of 'doubletty fit --shard K/N' into one table in input\n"
          "order (the table a single run would have written).  The shards\n"
          "must come from one run: the same settings and the same N.\n\n"
          "  -o, --output FILE  write the table to FILE (default: standard output)\n"
          "  --force            replace FILE if it exists (never one of the shards)\n"
          "  --expect N         the run had N inputs (entries of the lists and files)\n");
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

/* The "# key=value" settings lines above a shard's header, one string. */
typedef struct {
  char *text;        /* every settings line except shard=, concatenated */
  char *out;         /* every settings line, shard=0/1 for shard=K/N: what a
                        single run would have written */
  long k, n;         /* shard K/N (-1: none written) */
} settings;

/* Append line (len bytes) to the string *buf of length *len. */
static int append(char **buf, size_t *len, const char *line, size_t n) {
  char *t = realloc(*buf, *len + n + 1);
  if (!t) {
    cli_errorf("out of memory");
    return 1;
  }
  memcpy(t + *len, line, n);
  *len += n;
  t[*len] = '\0';
  *buf = t;
  return 0;
}

/* Read the settings lines and the header line of s into *st and s->line.
 * 0, or 1 after a message. */
static int read_head(shard *s, settings *st) {
  size_t len = 0, olen = 0;
  st->text = st->out = NULL;
  st->k = st->n = -1;
  for (;;) {
    s->len = getline(&s->line, &s->cap, s->f);
    s->lineno++;
    if (s->len <= 0 || s->line[s->len - 1] != '\n') {
      cli_errorf("%s: line %ld: no header line: not the output of doubletty fit", s->path,
                 s->lineno);
      return 1;
    }
    if (s->line[0] != '#') return 0;
    long k, n;
    char tail;
    if (sscanf(s->line, "# shard=%ld/%ld%c", &k, &n, &tail) == 3 && tail == '\n') {
      st->k = k;
      st->n = n;
      if (append(&st->out, &olen, "# shard=0/1\n", 12)) return 1;
      continue;
    }
    if (append(&st->text, &len, s->line, (size_t)s->len) ||
        append(&st->out, &olen, s->line, (size_t)s->len))
      return 1;
  }
}

/* The first line where two settings texts differ, for the message. */
static void first_difference(const char *a, const char *b, char *buf, size_t n) {
  a = a ? a : "";
  b = b ? b : "";
  while (*a && *a == *b) {
    const char *ea = strchr(a, '\n'), *eb = strchr(b, '\n');
    if (!ea || !eb || ea - a != eb - b || strncmp(a, b, (size_t)(ea - a))) break;
    a = ea + 1;
    b = eb + 1;
  }
  int la = (int)strcspn(a, "\n"), lb = (int)strcspn(b, "\n");
  snprintf(buf, n, "'%.*s' against '%.*s'", la, la ? a : "(none)", lb, lb ? b : "(none)");
}

/* Open every shard, read and compare settings and headers.  0, or 1 after
 * a message. */
static int open_shards(shard *sh, size_t n, char **header) {
  settings first = {NULL, NULL, -1, -1};
  int rc = 1;
  for (size_t k = 0; k < n; k++) {
    sh[k].f = fopen(sh[k].path, "r");
    if (!sh[k].f) {
      cli_errorf("%s: cannot open: %s", sh[k].path, strerror(errno));
      goto out;
    }
    settings st;
    int bad = read_head(&sh[k], &st);
    if (!bad && k == 0) {
      first = st;
      st.text = st.out = NULL;
      if (strncmp(sh[0].line, "index,", 6)) {
        cli_errorf("%s: line %ld: the header does not start with 'index': not the output "
                   "of doubletty fit", sh[0].path, sh[0].lineno);
        goto out;
      }
      size_t hl = 0;
      *header = NULL;
      if ((first.out && append(header, &hl, first.out, strlen(first.out))) ||
          append(header, &hl, sh[0].line, (size_t)sh[0].len))
        goto out;
      if (!*header) {
        cli_errorf("out of memory");
        goto out;
      }
    } else if (!bad) {
      char diff[512];
      if (st.n != first.n) {
        cli_errorf("%s: shard of %ld, but %s is a shard of %ld: the shard counts differ "
                   "(runs with different --shard K/N)", sh[k].path, st.n, sh[0].path, first.n);
        bad = 1;
      } else if (strcmp(st.text ? st.text : "", first.text ? first.text : "")) {
        first_difference(first.text, st.text, diff, sizeof diff);
        cli_errorf("%s: run with other settings than %s (%s): not shards of one run",
                   sh[k].path, sh[0].path, diff);
        bad = 1;
      } else if (strcmp(sh[k].line, *header + (first.out ? strlen(first.out) : 0))) {
        cli_errorf("%s: line %ld: the header differs from that of %s", sh[k].path,
                   sh[k].lineno, sh[0].path);
        bad = 1;
      }
    }
    free(st.text);
    free(st.out);
    if (bad || advance(&sh[k])) goto out;
  }
  rc = 0;
out:
  free(first.text);
  free(first.out);
  return rc;
}

/* Merge like sorted runs: always the rows of the smallest index next.
 * The number of inputs, or -1 after a message. */
static long merge_rows(shard *sh, size_t n, FILE *out) {
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
        return -1;
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
      return -1;
    }
    while (sh[best].index == idx) {
      fwrite(sh[best].line, 1, (size_t)sh[best].len, out);
      if (advance(&sh[best])) return -1;
    }
    last = idx;
  }
  return last + 1;
}

static const struct option LONGOPTS[] = {{"help", no_argument, NULL, 'h'},
                                         {"output", required_argument, NULL, 'o'},
                                         {"expect", required_argument, NULL, 'e'},
                                         {"force", no_argument, NULL, 'f'},
                                         {NULL, 0, NULL, 0}};

int cmd_merge(int argc, char **argv) {
  const char *out_path = NULL;
  long expect = -1;
  int force = 0, opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", LONGOPTS, NULL)) != -1) {
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 'o': out_path = optarg; break;
    case 'f': force = 1; break;
    case 'e':
      if (cli_parse_long("--expect", optarg, &expect)) return 2;
      if (expect < 0) {
        cli_errorf("--expect: %ld is not a number of inputs", expect);
        return 2;
      }
      break;
    default: return cli_opt_error("merge", opt, argv);
    }
  }
  size_t n = (size_t)(argc - optind);
  if (n == 0) {
    cli_errorf("merge: no shard output given");
    fprintf(stderr, "try 'doubletty merge --help'\n");
    return 2;
  }
  cli_out of;
  int rc = cli_out_check(&of, "merge", out_path, force);
  if (rc) return rc;
  for (int i = optind; i < argc; i++)
    if (cli_out_is_input(&of, argv[i])) return 2;
  shard *sh = calloc(n, sizeof *sh);
  char *header = NULL;
  if (!sh) {
    cli_errorf("out of memory");
    return 2;
  }
  for (size_t k = 0; k < n; k++) {
    sh[k].path = argv[optind + (int)k];
    sh[k].index = -1;
  }
  rc = 1;
  if (open_shards(sh, n, &header) || cli_out_open(&of)) goto done;
  fputs(header, of.f);
  long ninputs = merge_rows(sh, n, of.f);
  if (ninputs < 0) goto done;
  if (expect >= 0 && ninputs != expect) {
    cli_errorf("merge: %ld inputs found, %ld expected: a shard missing?", ninputs, expect);
    goto done;
  }
  if (cli_out_commit(&of)) goto done;
  rc = 0;
done:
  cli_out_abort(&of);
  for (size_t k = 0; k < n; k++) {
    if (sh[k].f) fclose(sh[k].f);
    free(sh[k].line);
  }
  free(header);
  free(sh);
  return rc;
}
