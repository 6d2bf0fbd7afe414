/* The inspector's key map: the one table of (action, key, help).
 *
 * The event loop looks keys up here, the help overlay lists this table,
 * `doubletty keys` prints it, the man page is checked against it and the
 * end-to-end tests find keys in it by action name.  Keys are our own codes
 * (printable characters as their Unicode code point, control keys 1..31,
 * DT_KEY_* for the rest) so
 * that this module needs no terminal; the terminal module translates. */
#ifndef DT_UI_KEYMAP_H
#define DT_UI_KEYMAP_H
#include <stddef.h>

/* Keys beyond ASCII (values chosen by us, not the terminal library's). */
enum {
  DT_KEY_CTRL_BASE = 0,  /* ^A = 1 ... ^Z = 26 */
  DT_KEY_TAB = 9,
  DT_KEY_ENTER = 13,
  DT_KEY_ESC = 27,
  DT_KEY_BACKSPACE = 127,
  DT_KEY_LEFT = 0x110001,  /* beyond Unicode: text keys may be any code point */
  DT_KEY_RIGHT,
  DT_KEY_UP,
  DT_KEY_DOWN,
  DT_KEY_PGUP,
  DT_KEY_PGDN,
  DT_KEY_HOME,
  DT_KEY_END,
  DT_KEY_BTAB,           /* shift-tab */
  DT_KEY_DELETE,
  DT_KEY_RESIZE,         /* the terminal changed size (not a key of the table) */
  DT_KEY_NONE = -1       /* nothing pressed (timeout) */
};

/* Everything the inspector can be told to do. */
typedef enum dt_cmd {
  DT_CMD_NONE = 0,
  DT_CMD_QUIT,
  DT_CMD_HELP,
  DT_CMD_REDRAW,
  DT_CMD_CURSOR_LEFT,
  DT_CMD_CURSOR_RIGHT,
  DT_CMD_CURSOR_LEFT_FAST,
  DT_CMD_CURSOR_RIGHT_FAST,
  DT_CMD_CURSOR_UP,
  DT_CMD_CURSOR_DOWN,
  DT_CMD_CURSOR_TO_VELOCITY,
  DT_CMD_ZOOM_IN,
  DT_CMD_ZOOM_OUT,
  DT_CMD_PAN_LEFT,
  DT_CMD_PAN_RIGHT,
  DT_CMD_VIEW_RESET,
  DT_CMD_TOGGLE_NORMALISED,
  DT_CMD_WINDOW_MARK,
  DT_CMD_WINDOW_UNMARK,
  DT_CMD_CONT_ORDER_UP,
  DT_CMD_CONT_ORDER_DOWN,
  DT_CMD_ADD_COMPONENT,
  DT_CMD_REMOVE_COMPONENT,
  DT_CMD_NEXT_COMPONENT,
  DT_CMD_PREV_COMPONENT,
  DT_CMD_V_DOWN,
  DT_CMD_V_UP,
  DT_CMD_V_DOWN_COARSE,
  DT_CMD_V_UP_COARSE,
  DT_CMD_B_DOWN,
  DT_CMD_B_UP,
  DT_CMD_B_DOWN_COARSE,
  DT_CMD_B_UP_COARSE,
  DT_CMD_LOGN_DOWN,
  DT_CMD_LOGN_UP,
  DT_CMD_LOGN_DOWN_COARSE,
  DT_CMD_LOGN_UP_COARSE,
  DT_CMD_HOLD_V,
  DT_CMD_HOLD_B,
  DT_CMD_HOLD_LOGN,
  DT_CMD_TIE_B,
  DT_CMD_REFIT,
  DT_CMD_AUTO_REFIT,
  DT_CMD_AUTOFIT,
  DT_CMD_UNDO,
  DT_CMD_REDO,
  DT_CMD_SWITCH_DOUBLET,
  DT_CMD_VERDICT_DETECTED,
  DT_CMD_VERDICT_NOT_DETECTED,
  DT_CMD_VERDICT_UNSURE,
  DT_CMD_VERDICT_UNUSABLE,
  DT_CMD_EDIT_NOTE,
  DT_CMD_NEXT_SPECTRUM,
  DT_CMD_PREV_SPECTRUM,
  DT_CMD_NEXT_UNJUDGED,
  DT_CMD_PREV_UNJUDGED,
  DT_CMD_GOTO_SPECTRUM,
  DT_CMD_NEXT_SYSTEM,
  DT_CMD_LINK_SPECIES,
  DT_CMD_B_RULE,
  DT_CMD_COVERING,
  DT_CMD__COUNT
} dt_cmd;

typedef struct dt_keybind {
  dt_cmd cmd;
  const char *name;    /* lower-case-hyphenated action name */
  int key;             /* one key */
  const char *group;   /* heading in the help overlay */
  const char *help;    /* one short line */
  double step;         /* nudges: the step, in unit (0 for the rest) */
  const char *unit;    /* nudges: "km/s" or "dex" */
} dt_keybind;

/* The table, in help order. */
const dt_keybind *dt_keymap_table(size_t *n);
/* The command bound to key (DT_CMD_NONE if none). */
dt_cmd dt_keymap_lookup(int key);
/* The binding of a command or of an action name; NULL if none. */
const dt_keybind *dt_keymap_of(dt_cmd cmd);
const dt_keybind *dt_keymap_find(const char *name);
/* Readable key name into buf: "a", "A", "Left", "^L", "Tab", "S-Tab",
 * "Space", "PgUp" ...; returns buf. */
const char *dt_keymap_keyname(int key, char *buf, size_t size);
/* The key of a readable name (inverse of dt_keymap_keyname); -1 if none. */
int dt_keymap_keycode(const char *name);

#endif
