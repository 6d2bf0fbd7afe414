/* Output files of the batch commands: never a half file, never an input.
 *
 * The output is written to a temporary file beside the target and renamed
 * into place only when everything was written, so an interrupted or failed
 * run leaves the old file (or none).  An existing file is replaced only with
 * --force, and never when it is one of the run's inputs (same device and
 * inode: a spectrum, a list, a session, a shard), force or not.  A target
 * that exists and is not a regular file (a device such as /dev/null, a
 * named pipe) is written in place: renaming over it would replace the
 * device itself. */
#ifndef DT_OUTFILE_H
#define DT_OUTFILE_H
#include <stdio.h>
#include <sys/types.h>

typedef struct cli_out {
  const char *cmd;   /* for messages: "fit", "merge" */
  const char *path;  /* the target; NULL = standard output */
  char *tmp;         /* the temporary file while writing */
  FILE *f;           /* where to write (stdout or the temporary file) */
  int exists;        /* the target exists: dev/ino identify it */
  int direct;        /* the target is not a regular file (/dev/null, a pipe):
                        written in place, never replaced */
  dev_t dev;
  ino_t ino;
} cli_out;

/* Check the target (path NULL or "-": standard output): a directory is
 * refused, an existing file unless force.  0, or the exit status 2 after a
 * message. */
int cli_out_check(cli_out *o, const char *cmd, const char *path, int force);
/* 1 after a message when input (a file name, maybe with a "[ext]" selector)
 * is the target file itself; 0 otherwise. */
int cli_out_is_input(const cli_out *o, const char *input);
/* Open the temporary file (or standard output) as o->f.  0, or 1 after a
 * message. */
int cli_out_open(cli_out *o);
/* Flush and move the temporary file into place.  0, or 1 after a message
 * (the temporary file is removed). */
int cli_out_commit(cli_out *o);
/* Give up: close and remove the temporary file, if any. */
void cli_out_abort(cli_out *o);

#endif
