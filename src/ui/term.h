/* The terminal: the one module that talks to curses.
 *
 * It sets the terminal up (locale, keys, colours), copies a dt_grid to the
 * screen, reads keys (translated to the key codes of keymap.h), and puts
 * the terminal back the way it found it on every way out: a normal close,
 * exit(), SIGINT/SIGTERM/SIGHUP/SIGQUIT (reported to the event loop, which
 * closes in order) and fatal signals (SIGSEGV, SIGABRT, SIGBUS, SIGFPE:
 * terminal modes restored from the signal handler with async-signal-safe
 * calls, then the signal is re-raised). */
#ifndef DT_UI_TERM_H
#define DT_UI_TERM_H
#include <stddef.h>
#include "grid.h"

typedef struct dt_term_opts {
  int colour;          /* -1: when the terminal has colours; 0: never; 1: if possible */
  int ascii;           /* 1: plain ASCII even in a UTF-8 locale */
  int headless;        /* 1: no real terminal: curses writes to /dev/null,
                          size from width/height below (for replay/benchmarks) */
  int width, height;   /* headless screen size */
} dt_term_opts;

/* Can we run full-screen at all?  0 if yes; otherwise -1 and a message
 * (TERM unset, "dumb", unknown to terminfo, stdin/stdout not terminals).
 * Call before dt_term_open; headless mode needs no terminal. */
int dt_term_check(const dt_term_opts *o, char *msg, size_t size);

/* Set up the screen.  0, or -1 with a message. */
int dt_term_open(const dt_term_opts *o, char *msg, size_t size);
/* Restore the terminal (idempotent; also run at exit). */
void dt_term_close(void);

int dt_term_utf8(void);      /* 1: the locale is UTF-8 and ASCII was not forced */
int dt_term_colour(void);    /* 1: colours in use */
void dt_term_size(int *w, int *h);

/* Next key: a key code of keymap.h, DT_KEY_RESIZE after a size change,
 * DT_KEY_NONE after timeout_ms (< 0: wait) or when a signal arrived. */
int dt_term_getkey(int timeout_ms);
/* A terminating signal received since open (0: none). */
int dt_term_signal(void);
/* Copy the grid to the screen (only changed cells are sent). */
void dt_term_draw(const dt_grid *g);
/* The cell's character as the terminal gets it: itself when it takes one
 * column in the current locale, else "?" (wide and zero-width characters
 * would shift the row). */
const char *dt_term_one_column(const char *ch);
/* Force a full repaint at the next draw. */
void dt_term_invalidate(void);

/* The foreground colour a role gets on the continuum-window shade winbg
 * (curses colour numbers): its own, unless that is the shade's colour. */
short dt_term_window_fg(short fg, short winbg);

#endif
