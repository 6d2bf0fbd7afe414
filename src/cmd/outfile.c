/* Output files of the batch commands: temporary file, rename, and the
 * refusal to replace an input (see outfile.h). */
#include "outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"

int cli_out_check(cli_out *o, const char *cmd, const char *path, int force) {
  memset(o, 0, sizeof *o);
  o->cmd = cmd;
  o->f = stdout;
  if (!path || !strcmp(path, "-")) return 0;
  o->path = path;
  struct stat st;
  if (stat(path, &st) != 0) return 0;
  if (S_ISDIR(st.st_mode)) {
    cli_errorf("%s: %s: is a directory; give a file name for the output", cmd, path);
    return 2;
  }
  o->exists = 1;
  o->dev = st.st_dev;
  o->ino = st.st_ino;
  o->direct = !S_ISREG(st.st_mode);
  if (!force && S_ISREG(st.st_mode)) {
    cli_errorf("%s: %s: file exists; use --force to replace it", cmd, path);
    return 2;
  }
  return 0;
}

int cli_out_is_input(const cli_out *o, const char *input) {
  if (!o->exists || !input || !strcmp(input, "-")) return 0;
  struct stat st;
  int same = stat(input, &st) == 0 && st.st_dev == o->dev && st.st_ino == o->ino;
  if (!same) {
    /* "file.fits[2]": the file without its extension selector */
    size_t n = strlen(input);
    const char *br = strrchr(input, '[');
    if (n > 2 && input[n - 1] == ']' && br && br > input) {
      char *plain = strndup(input, (size_t)(br - input));
      same = plain && stat(plain, &st) == 0 && st.st_dev == o->dev && st.st_ino == o->ino;
      free(plain);
    }
  }
  if (same)
    cli_errorf("%s: %s: the output is also an input (%s); choose another output", o->cmd,
               o->path, input);
  return same;
}

int cli_out_open(cli_out *o) {
  if (!o->path) return 0;
  if (o->direct) {
    if (!(o->f = fopen(o->path, "w"))) {
      cli_errorf("%s: %s: cannot write: %s", o->cmd, o->path, strerror(errno));
      return 1;
    }
    return 0;
  }
  size_t len = strlen(o->path) + 16;
  o->tmp = malloc(len);
  if (!o->tmp) {
    cli_errorf("out of memory");
    return 1;
  }
  snprintf(o->tmp, len, "%s.tmp-XXXXXX", o->path);
  int fd = mkstemp(o->tmp);
  if (fd < 0) {
    cli_errorf("%s: %s: cannot create: %s", o->cmd, o->path, strerror(errno));
    free(o->tmp);
    o->tmp = NULL;
    return 1;
  }
  o->f = fdopen(fd, "w");
  if (!o->f) {
    close(fd);
    cli_out_abort(o);
    cli_errorf("%s: %s: cannot write: %s", o->cmd, o->path, strerror(errno));
    return 1;
  }
  return 0;
}

int cli_out_commit(cli_out *o) {
  int bad = fflush(o->f) != 0 || ferror(o->f);
  if (!o->path) {
    if (bad) cli_errorf("%s: cannot write to standard output", o->cmd);
    return bad;
  }
  if (o->direct) {
    bad |= fclose(o->f) != 0;
    o->f = NULL;
    if (bad) cli_errorf("%s: %s: cannot write: %s", o->cmd, o->path, strerror(errno));
    return bad;
  }
  bad |= fsync(fileno(o->f)) != 0;
  int err = errno;
  bad |= fclose(o->f) != 0;
  o->f = NULL;
  if (!bad) {
    mode_t um = umask(0);
    umask(um);
    (void)chmod(o->tmp, 0666 & ~um);
    bad = rename(o->tmp, o->path) != 0;
    err = errno;
  }
  if (bad) {
    cli_errorf("%s: %s: cannot write: %s", o->cmd, o->path, strerror(err));
    cli_out_abort(o);
    return 1;
  }
  free(o->tmp);
  o->tmp = NULL;
  return 0;
}

void cli_out_abort(cli_out *o) {
  if (o->f && o->f != stdout) fclose(o->f);
  o->f = NULL;
  if (o->tmp) {
    unlink(o->tmp);
    free(o->tmp);
    o->tmp = NULL;
  }
}
