/* Fuzz target: the inspector's key dispatcher, on a headless screen.
 *
 * Once per process a small survey is written (dt_demo_write: FITS images,
 * tables and a text spectrum) plus one file that is not a spectrum, and a
 * queue of their targets is built.  Each input then becomes a stream of
 * keystrokes, replayed through dt_inspect_run in its headless mode (the
 * screen drawn into curses on /dev/null) with a fresh session file:
 *
 *   byte 0           the screen size: width 60 + 8 (b & 15) columns, height
 *                    16 + 3 (b >> 4) lines (some below the smallest usable
 *                    screen, 80 x 24, on purpose)
 *   each next byte   b < 0xE0: the action number b of the key table (modulo
 *                    its length), in table order;
 *                    0xE0..0xEF: a key by name (Enter, Esc, Backspace, Del,
 *                    arrows, Home, End, Tab, S-Tab, PgUp, PgDn, Space, ^L);
 *                    0xF0..0xFF: typing, the next 1 + (b & 15) bytes as text
 *                    (any bytes but NUL and line ends: broken UTF-8 too)
 *
 * at most 48 keystrokes an input (every change refits).  Besides no crash,
 * leak or undefined behaviour, the run must end normally, and the session
 * file it wrote must replay without a damaged line or a record that does
 * not follow from the ones before (what the screen recorded is what a
 * resumed session gets). */
#include <dirent.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/atomic.h"
#include "demo.h"
#include "doubletty/journal.h"
#include "inspector.h"
#include "keymap.h"
#include "queue.h"

#define MAX_KEYS 48

static dt_atomic *g_atomic;
static dt_queue g_queue;
static char g_dir[64], g_keys[96], g_session[96];

/* Remove the files of g_dir (two levels deep) and g_dir itself. */
static void remove_tree(const char *path, int depth) {
  DIR *d = opendir(path);
  if (d) {
    for (struct dirent *de; (de = readdir(d));) {
      if (!strcmp(de->d_name, ".") || !strcmp(de->d_name, "..")) continue;
      char p[512];
      snprintf(p, sizeof p, "%s/%s", path, de->d_name);
      if (remove(p) != 0 && depth > 0) remove_tree(p, depth - 1);
    }
    closedir(d);
  }
  rmdir(path);
}

static void cleanup(void) {
  if (g_dir[0]) remove_tree(g_dir, 1);
}

static void setup_fail(const char *what, const dt_err *e) {
  fprintf(stderr, "fuzz_keys: %s%s%s\n", what, e ? ": " : "", e ? e->what : "");
  exit(1);
}

int LLVMFuzzerInitialize(int *argc, char ***argv) {
  (void)argc;
  (void)argv;
  dt_err e;
  const char *atomic = getenv("DT_FUZZ_ATOMIC");
  if (dt_atomic_load(atomic ? atomic : "share/doubletty/atomic.dat", &g_atomic, &e) != DT_OK)
    setup_fail("cannot load the atomic table (run from the source tree or set DT_FUZZ_ATOMIC)",
               &e);
  const char *tmp = access("/dev/shm", W_OK) == 0 ? "/dev/shm" : "/tmp";
  snprintf(g_dir, sizeof g_dir, "%s/dt-fuzz-keys.XXXXXX", tmp);
  if (!mkdtemp(g_dir)) setup_fail("cannot make a directory", NULL);
  atexit(cleanup);
  dt_demo_opts o = dt_demo_opts_default();
  o.nai = dt_atomic_find(g_atomic, "NaI");
  o.caii = dt_atomic_find(g_atomic, "CaII");
  o.count = 4;
  char survey[128], list[160], junk[160];
  snprintf(survey, sizeof survey, "%s/survey", g_dir);
  if (dt_demo_write(survey, &o, NULL, &e) != DT_OK) setup_fail("cannot write the survey", &e);
  dt_queue_init(&g_queue);
  snprintf(list, sizeof list, "%s/targets.list", survey);
  size_t nbad = 0;
  if (dt_queue_add_list(&g_queue, list, &nbad, NULL, &e) != DT_OK || nbad)
    setup_fail("cannot read the target list", &e);
  snprintf(junk, sizeof junk, "%s/not-a-spectrum.fits", g_dir);
  FILE *f = fopen(junk, "w");
  if (!f) setup_fail("cannot write a file", NULL);
  fputs("SIMPLE  = this is not a FITS header\n", f);
  fclose(f);
  if (dt_queue_add_file(&g_queue, junk, &e) != DT_OK) setup_fail("cannot add a file", &e);
  snprintf(g_keys, sizeof g_keys, "%s/keys", g_dir);
  snprintf(g_session, sizeof g_session, "%s/fuzz.session", g_dir);
  return 0;
}

/* The input as a key file (see the top of this file); the number of keys. */
static int write_keys(const uint8_t *d, size_t n, FILE *f) {
  static const char *const named[16] = {"Enter", "Esc",  "Backspace", "Del",  "Left", "Right",
                                        "Up",    "Down", "Home",      "End",  "Tab",  "S-Tab",
                                        "PgUp",  "PgDn", "Space",     "^L"};
  size_t nbind = 0;
  const dt_keybind *table = dt_keymap_table(&nbind);
  int keys = 0;
  for (size_t i = 1; i < n && keys < MAX_KEYS; i++) {
    uint8_t b = d[i];
    if (b < 0xE0) {
      fprintf(f, "%s\n", table[b % nbind].name);
    } else if (b < 0xF0) {
      fprintf(f, "%s\n", named[b & 15]);
    } else {
      size_t len = 1 + (size_t)(b & 15);
      fputs("type ", f);
      for (size_t k = 0; k < len && i + 1 < n; k++) {
        uint8_t c = d[++i];
        if (c == 0 || c == '\n' || c == '\r') c = '_';
        fputc(c, f);
      }
      fputc('\n', f);
    }
    keys++;
  }
  return keys;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  if (size < 1) return 0;
  FILE *f = fopen(g_keys, "w");
  if (!f) return 0;
  write_keys(data, size, f);
  fclose(f);
  for (size_t i = 0; i < g_queue.n; i++) g_queue.e[i].verdict = -1; /* forget cached verdicts */

  dt_journal *jn = NULL;
  dt_err e;
  unlink(g_session);
  if (dt_journal_open(g_session, DT_JOURNAL_RW, "fuzz", &jn, &e) != DT_OK)
    setup_fail("cannot open the session", &e);
  dt_inspect_opts o;
  dt_inspect_opts_init(&o);
  o.replay = g_keys;
  o.width = 60 + 8 * (data[0] & 15);
  o.height = 16 + 3 * (data[0] >> 4);
  o.colour = 0;
  char msg[512] = "";
  int rc = dt_inspect_run(&g_queue, g_atomic, jn, &o, msg, sizeof msg);
  int failed = dt_journal_failed(jn);
  dt_journal_close(jn);
  if (rc != 0 || failed) {
    fprintf(stderr, "fuzz_keys: the run ended with status %d (%s)%s\n", rc, msg,
            failed ? "; the session could not be written" : "");
    __builtin_trap();
  }

  /* what was recorded replays cleanly */
  if (dt_journal_open(g_session, DT_JOURNAL_READ_ONLY, NULL, &jn, &e) != DT_OK) {
    fprintf(stderr, "fuzz_keys: the session does not open: %s: %s\n", e.where, e.what);
    __builtin_trap();
  }
  if (dt_journal_warning_count(jn) > 0) {
    fprintf(stderr, "fuzz_keys: the session replays with %zu warning(s): %s\n",
            dt_journal_warning_count(jn), dt_journal_warning(jn, 0));
    __builtin_trap();
  }
  for (size_t i = 0; i < dt_journal_count(jn); i++)
    if (dt_journal_entry_at(jn, i)->flags & DT_JFLAG_REPLAY_MISMATCH) __builtin_trap();
  dt_journal_close(jn);
  return 0;
}
