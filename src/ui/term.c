/* The terminal module: curses set-up and teardown, colours, keys, signals.
 *
 * Nothing else in doubletty calls curses.  The rest of the UI draws into a
 * dt_grid (grid.h); dt_term_draw copies it to curses, which sends only what
 * changed.  Roles become colour pairs when the terminal has colours, and
 * bold/dim/reverse/underline otherwise, so every role stays tellable apart
 * on a monochrome screen.
 *
 * Signals: SIGINT, SIGTERM, SIGHUP and SIGQUIT only set a flag (installed
 * without SA_RESTART, so a waiting read returns at once); the event loop
 * sees it through dt_term_signal, closes the session and the screen in
 * order and exits.  Fatal signals cannot do that safely, so their handler
 * restores the saved terminal modes with tcsetattr and writes the
 * terminal's "leave full-screen" strings with write(2) -- both
 * async-signal-safe -- before re-raising the signal.  SIGWINCH and SIGTSTP
 * are left to curses (a resize arrives as a key).  A terminal that goes
 * away without a SIGHUP (the key read fails, the input reports a hangup)
 * counts as a SIGHUP. */
#define NCURSES_WIDECHAR 1
#include "term.h"

#include <curses.h>
#include <errno.h>
#include <langinfo.h>
#include <locale.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <unistd.h>
#include <wchar.h>

#include "doubletty/utf8.h"

#include "keymap.h"

static SCREEN *g_screen;
static FILE *g_out, *g_in;              /* headless streams */
static int g_open, g_utf8, g_colour, g_headless;
static volatile sig_atomic_t g_signal;
static struct termios g_saved_tio;
static int g_have_tio;
static char g_leave[256];               /* sgr0 + cnorm + rmcup, for fatal signals */
static size_t g_leave_len;
static attr_t g_attr[DT_R__COUNT][2];   /* [fg role][background: 0 plain, 1 window] */
static short g_pair[DT_R__COUNT][2];
static int g_atexit_done;

static void on_term_signal(int sig) { g_signal = sig; }

static void on_fatal_signal(int sig) {
  if (g_have_tio) tcsetattr(STDIN_FILENO, TCSANOW, &g_saved_tio);
  if (g_leave_len && !g_headless) {
    ssize_t r = write(STDOUT_FILENO, g_leave, g_leave_len);
    (void)r;
  }
  signal(sig, SIG_DFL);
  raise(sig);
}

static void install(int sig, void (*fn)(int)) {
  struct sigaction sa;
  memset(&sa, 0, sizeof sa);
  sa.sa_handler = fn;
  sigemptyset(&sa.sa_mask);
  sa.sa_flags = 0; /* no SA_RESTART: interrupt the key read */
  sigaction(sig, &sa, NULL);
}

int dt_term_check(const dt_term_opts *o, char *msg, size_t size) {
  if (o && o->headless) return 0;
  const char *t = getenv("TERM");
  if (!t || !*t) {
    snprintf(msg, size, "TERM is not set: the inspector needs a terminal it can draw on "
                        "(set TERM, e.g. TERM=xterm-256color)");
    return -1;
  }
  if (!strcmp(t, "dumb") || !strncmp(t, "dumb-", 5)) {
    snprintf(msg, size, "TERM=%s cannot show a full screen: the inspector needs a terminal "
                        "with cursor addressing (e.g. TERM=xterm-256color)", t);
    return -1;
  }
  if (!isatty(STDIN_FILENO) || !isatty(STDOUT_FILENO)) {
    snprintf(msg, size, "standard input and output must be a terminal for the inspector");
    return -1;
  }
  return 0;
}

short dt_term_window_fg(short fg, short winbg) {
  /* on 8-colour terminals the window shade is blue: the blue rest-frame
     guide would vanish in it, so it turns white there */
  return fg == winbg ? (winbg == 7 ? 0 : 7) : fg;
}

static void setup_colours(int want) {
  /* roles -> (colour, attributes); -1 is the terminal's default colour */
  static const struct { short fg; attr_t colour_attr; attr_t mono_attr; } spec[DT_R__COUNT] = {
      [DT_R_NONE] = {-1, 0, 0},
      [DT_R_TEXT] = {-1, 0, 0},
      [DT_R_LABEL] = {-1, A_BOLD, A_BOLD},
      [DT_R_AXIS] = {-1, 0, 0},
      [DT_R_REF] = {COLOR_BLUE, 0, A_DIM},
      [DT_R_SIGMA] = {COLOR_MAGENTA, 0, A_DIM},
      [DT_R_MASKED] = {COLOR_RED, 0, A_DIM},
      [DT_R_CONT] = {COLOR_CYAN, 0, 0},
      [DT_R_COMP] = {COLOR_GREEN, 0, A_DIM},
      [DT_R_FLUX] = {-1, 0, 0},
      [DT_R_MODEL] = {COLOR_YELLOW, A_BOLD, A_BOLD},
      [DT_R_COMPSEL] = {COLOR_GREEN, A_BOLD, A_BOLD | A_UNDERLINE},
      [DT_R_OFFPLOT] = {COLOR_RED, A_BOLD, A_BOLD},
      [DT_R_WINDOW] = {-1, 0, 0},
      [DT_R_CURSOR] = {-1, A_REVERSE, A_REVERSE},
      [DT_R_TITLE] = {-1, A_REVERSE | A_BOLD, A_REVERSE | A_BOLD},
      [DT_R_GOOD] = {COLOR_GREEN, A_BOLD, A_BOLD},
      [DT_R_WARN] = {COLOR_YELLOW, A_BOLD, A_BOLD},
      [DT_R_BAD] = {COLOR_RED, A_BOLD, A_BOLD | A_REVERSE},
      [DT_R_SELECTED] = {-1, A_REVERSE, A_REVERSE},
  };
  g_colour = 0;
  if (want != 0 && has_colors() && start_color() == OK) {
    use_default_colors();
    short winbg = COLORS >= 256 ? 236 : COLOR_BLUE;
    if (COLOR_PAIRS > 2 * DT_R__COUNT + 1) {
      g_colour = 1;
      for (int r = 0; r < DT_R__COUNT; r++)
        for (int w = 0; w < 2; w++) {
          short pair = (short)(1 + 2 * r + w);
          init_pair(pair, w ? dt_term_window_fg(spec[r].fg, winbg) : spec[r].fg, w ? winbg : -1);
          g_pair[r][w] = pair;
          g_attr[r][w] = spec[r].colour_attr;
        }
    }
  }
  if (!g_colour)
    for (int r = 0; r < DT_R__COUNT; r++) {
      g_pair[r][0] = g_pair[r][1] = 0;
      g_attr[r][0] = spec[r].mono_attr;
      g_attr[r][1] = spec[r].mono_attr | A_UNDERLINE;
    }
}

static void at_exit(void) { dt_term_close(); }

static void add_leave(const char *cap) {
  char *s = tigetstr(cap);
  if (!s || s == (char *)-1) return;
  size_t k = strlen(s);
  if (g_leave_len + k < sizeof g_leave) {
    memcpy(g_leave + g_leave_len, s, k);
    g_leave_len += k;
  }
}

int dt_term_open(const dt_term_opts *o, char *msg, size_t size) {
  if (g_open) return 0;
  dt_term_opts def = {-1, 0, 0, 100, 32};
  if (!o) o = &def;
  setlocale(LC_CTYPE, "");   /* characters only: numbers stay in the C locale */
  const char *cs = nl_langinfo(CODESET);
  g_utf8 = cs && (!strcmp(cs, "UTF-8") || !strcmp(cs, "utf8")) && !o->ascii;
  g_headless = o->headless;
  g_signal = 0;
  if (o->headless) {
    g_out = fopen("/dev/null", "w");
    g_in = fopen("/dev/null", "r");
    if (!g_out || !g_in) {
      snprintf(msg, size, "cannot open /dev/null: %s", strerror(errno));
      return -1;
    }
    static const char *const types[] = {"xterm-256color", "xterm", "vt100"};
    for (size_t i = 0; i < 3 && !g_screen; i++) g_screen = newterm((char *)types[i], g_out, g_in);
  } else {
    g_have_tio = tcgetattr(STDIN_FILENO, &g_saved_tio) == 0;
    g_screen = newterm(NULL, stdout, stdin);
  }
  if (!g_screen) {
    const char *t = getenv("TERM");
    snprintf(msg, size, "cannot set up the terminal (TERM=%s unknown to terminfo?)", t ? t : "");
    if (g_out) fclose(g_out);
    if (g_in) fclose(g_in);
    g_out = g_in = NULL;
    return -1;
  }
  set_term(g_screen);
  g_open = 1;
  if (!g_atexit_done) {
    atexit(at_exit);
    g_atexit_done = 1;
  }
  g_leave_len = 0;
  add_leave("sgr0");
  add_leave("cnorm");
  add_leave("rmcup");
  install(SIGINT, on_term_signal);
  install(SIGTERM, on_term_signal);
  install(SIGHUP, on_term_signal);
  install(SIGQUIT, on_term_signal);
  install(SIGSEGV, on_fatal_signal);
  install(SIGBUS, on_fatal_signal);
  install(SIGFPE, on_fatal_signal);
  install(SIGABRT, on_fatal_signal);
  cbreak();
  noecho();
  nonl();
  keypad(stdscr, TRUE);
  set_escdelay(30);
  curs_set(0);
  leaveok(stdscr, TRUE);
  setup_colours(o->colour);
  if (o->headless) resize_term(o->height > 0 ? o->height : 32, o->width > 0 ? o->width : 100);
  return 0;
}

void dt_term_close(void) {
  if (!g_open) return;
  g_open = 0;
  curs_set(1);
  endwin();
  delscreen(g_screen);
  g_screen = NULL;
  if (g_out) fclose(g_out);
  if (g_in) fclose(g_in);
  g_out = g_in = NULL;
  signal(SIGSEGV, SIG_DFL);
  signal(SIGBUS, SIG_DFL);
  signal(SIGFPE, SIG_DFL);
  signal(SIGABRT, SIG_DFL);
  fflush(stdout);
}

int dt_term_utf8(void) { return g_utf8; }
int dt_term_colour(void) { return g_colour; }
int dt_term_signal(void) { return (int)g_signal; }

void dt_term_size(int *w, int *h) {
  if (!g_open) {
    *w = *h = 0;
    return;
  }
  *w = COLS;
  *h = LINES;
}

/* A read that waits for a key and fails without a signal: has the terminal
 * gone (the connection closed without a SIGHUP reaching us, e.g. when this
 * terminal is not our controlling one)?  Then it is a hangup; reading again
 * would fail again at once, for ever. */
static int terminal_gone(void) {
  struct pollfd p = {STDIN_FILENO, POLLIN, 0};
  return poll(&p, 1, 0) > 0 && (p.revents & (POLLHUP | POLLERR | POLLNVAL));
}

int dt_term_getkey(int timeout_ms) {
  if (!g_open) return DT_KEY_NONE;
  if (g_signal) return DT_KEY_NONE;
  wtimeout(stdscr, timeout_ms);
  wint_t ch;
  int rc = wget_wch(stdscr, &ch);
  if (rc == ERR) {
    if (timeout_ms < 0 && !g_signal && !g_headless && terminal_gone()) g_signal = SIGHUP;
    return DT_KEY_NONE;
  }
  if (rc == KEY_CODE_YES) {
    switch (ch) {
    case KEY_LEFT: return DT_KEY_LEFT;
    case KEY_RIGHT: return DT_KEY_RIGHT;
    case KEY_UP: return DT_KEY_UP;
    case KEY_DOWN: return DT_KEY_DOWN;
    case KEY_PPAGE: return DT_KEY_PGUP;
    case KEY_NPAGE: return DT_KEY_PGDN;
    case KEY_HOME: return DT_KEY_HOME;
    case KEY_END: return DT_KEY_END;
    case KEY_BTAB: return DT_KEY_BTAB;
    case KEY_DC: return DT_KEY_DELETE;
    case KEY_BACKSPACE: return DT_KEY_BACKSPACE;
    case KEY_ENTER: return DT_KEY_ENTER;
    case KEY_RESIZE: return DT_KEY_RESIZE;
    default: return DT_KEY_NONE;
    }
  }
  if (ch == '\n' || ch == '\r') return DT_KEY_ENTER;
  if (ch == 8) return DT_KEY_BACKSPACE;
  return (int)ch;
}

void dt_term_invalidate(void) {
  if (g_open) clearok(curscr, TRUE);
}

/* A grid cell holds one code point and the layout counts one column for
 * it; a character the terminal would draw two columns wide (CJK, most
 * emoji) or none (combining marks) would shift the rest of its row, so it
 * goes out as '?' (wcwidth: the screen is the one place the locale rules). */
const char *dt_term_one_column(const char *ch) {
  uint32_t cp;
  size_t len = strlen(ch);
  if (len <= 1) return ch;
  if (dt_utf8_decode(ch, len, &cp) != len || cp == DT_UTF8_BAD) return "?";
  return wcwidth((wchar_t)cp) == 1 ? ch : "?";
}

void dt_term_draw(const dt_grid *g) {
  if (!g_open) return;
  char run[4096];
  for (int y = 0; y < g->h && y < LINES; y++) {
    int x = 0;
    while (x < g->w && x < COLS) {
      const dt_cell *c0 = &g->cell[(size_t)y * g->w + x];
      int x0 = x;
      size_t n = 0;
      /* a run of cells with the same looks goes out in one call */
      while (x < g->w && x < COLS) {
        const dt_cell *c = &g->cell[(size_t)y * g->w + x];
        if (c->fg != c0->fg || c->bg != c0->bg || c->attr != c0->attr) break;
        const char *ch = dt_term_one_column(c->ch);
        size_t k = strlen(ch);
        if (n + k + 1 > sizeof run) break;
        memcpy(run + n, ch, k);
        n += k;
        x++;
      }
      run[n] = '\0';
      int fg = c0->fg < DT_R__COUNT ? c0->fg : DT_R_TEXT;
      int win = c0->bg == DT_R_WINDOW;
      attr_t a = g_attr[fg][win];
      if (c0->bg == DT_R_CURSOR || c0->bg == DT_R_SELECTED || c0->bg == DT_R_TITLE) a |= A_REVERSE;
      if (c0->attr & DT_A_BOLD) a |= A_BOLD;
      if (c0->attr & DT_A_DIM) a |= A_DIM;
      if (c0->attr & DT_A_REVERSE) a |= A_REVERSE;
      if (c0->attr & DT_A_UNDERLINE) a |= A_UNDERLINE;
      attr_set(a, g_pair[fg][win], NULL);
      mvaddstr(y, x0, run);
    }
  }
  attr_set(A_NORMAL, 0, NULL);
  refresh();
}
