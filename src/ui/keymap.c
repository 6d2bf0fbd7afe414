/* The key table of the inspector (see keymap.h).
 *
 * The layout is meant to be learnt in one sitting: verdicts sit together on
 * the bottom row (y n m b: yes / no / maybe / bad data); components are
 * nudged with paired keys, lower case fine and shifted coarse -- brackets
 * move a component in velocity, angle keys (< >) make it narrower or
 * wider, minus/plus lower or raise its column density (a nudged parameter
 * is held); v, d and o hold or release the velocity, the Doppler b and the
 * column density; h/l pan and j/k walk the queue; arrows move the cursor.
 * No verdict key has a case-variant bound to anything: a slipped Shift
 * never records a verdict.  A nudge's step is a column of the table, and
 * its help text is checked against it (tests/unit/test_keymap.c). */
#include "keymap.h"

#include <stdio.h>
#include <string.h>

#define CTRL(c) ((c) & 0x1f)

static const dt_keybind table[] = {
    /* program */
    {DT_CMD_HELP, "help", '?', "program", "show or hide this list of keys", 0, NULL},
    {DT_CMD_QUIT, "quit", 'q', "program", "leave (every judgement is already saved)", 0, NULL},
    {DT_CMD_REDRAW, "redraw", CTRL('L'), "program", "redraw the whole screen", 0, NULL},
    /* cursor and view */
    {DT_CMD_CURSOR_LEFT, "cursor-left", DT_KEY_LEFT, "cursor and view", "move the cursor one column left", 0, NULL},
    {DT_CMD_CURSOR_RIGHT, "cursor-right", DT_KEY_RIGHT, "cursor and view", "move the cursor one column right", 0, NULL},
    {DT_CMD_CURSOR_LEFT_FAST, "cursor-left-fast", 'H', "cursor and view", "move the cursor eight columns left", 0, NULL},
    {DT_CMD_CURSOR_RIGHT_FAST, "cursor-right-fast", 'L', "cursor and view", "move the cursor eight columns right", 0, NULL},
    {DT_CMD_CURSOR_UP, "cursor-up", DT_KEY_UP, "cursor and view", "cursor to the panel above", 0, NULL},
    {DT_CMD_CURSOR_DOWN, "cursor-down", DT_KEY_DOWN, "cursor and view", "cursor to the panel below", 0, NULL},
    {DT_CMD_CURSOR_TO_VELOCITY, "cursor-to-velocity", 'G', "cursor and view", "type a velocity (km/s) to put the cursor at", 0, NULL},
    {DT_CMD_ZOOM_IN, "zoom-in", 'z', "cursor and view", "narrower velocity range, centred on the cursor", 0, NULL},
    {DT_CMD_ZOOM_OUT, "zoom-out", 'Z', "cursor and view", "wider velocity range", 0, NULL},
    {DT_CMD_PAN_LEFT, "pan-left", 'h', "cursor and view", "shift the view to lower velocities", 0, NULL},
    {DT_CMD_PAN_RIGHT, "pan-right", 'l', "cursor and view", "shift the view to higher velocities", 0, NULL},
    {DT_CMD_VIEW_RESET, "view-reset", '0', "cursor and view", "show the whole fit window again", 0, NULL},
    {DT_CMD_TOGGLE_NORMALISED, "toggle-normalised", 'f', "cursor and view", "panels: normalised flux or raw flux", 0, NULL},
    /* continuum */
    {DT_CMD_WINDOW_MARK, "window-mark", 'w', "continuum", "mark a continuum window: press at each end", 0, NULL},
    {DT_CMD_WINDOW_UNMARK, "window-unmark", 'W', "continuum", "remove the continuum window under the cursor", 0, NULL},
    {DT_CMD_CONT_ORDER_UP, "continuum-order-up", 'c', "continuum", "raise the continuum polynomial order", 0, NULL},
    {DT_CMD_CONT_ORDER_DOWN, "continuum-order-down", 'C', "continuum", "lower the order (below 0: fixed at 1)", 0, NULL},
    /* components */
    {DT_CMD_ADD_COMPONENT, "add-component", 'a', "components", "add a component at the cursor velocity", 0, NULL},
    {DT_CMD_REMOVE_COMPONENT, "remove-component", 'x', "components", "remove the selected component", 0, NULL},
    {DT_CMD_NEXT_COMPONENT, "next-component", DT_KEY_TAB, "components", "select the next component", 0, NULL},
    {DT_CMD_PREV_COMPONENT, "previous-component", DT_KEY_BTAB, "components", "select the previous component", 0, NULL},
    {DT_CMD_V_DOWN, "nudge-v-down", '[', "components", "selected component: velocity -2 km/s, held", -2.0, "km/s"},
    {DT_CMD_V_UP, "nudge-v-up", ']', "components", "selected component: velocity +2 km/s, held", 2.0, "km/s"},
    {DT_CMD_V_DOWN_COARSE, "nudge-v-down-coarse", '{', "components", "selected component: velocity -20 km/s, held", -20.0, "km/s"},
    {DT_CMD_V_UP_COARSE, "nudge-v-up-coarse", '}', "components", "selected component: velocity +20 km/s, held", 20.0, "km/s"},
    {DT_CMD_B_DOWN, "nudge-b-down", ',', "components", "selected component: b -0.5 km/s, held", -0.5, "km/s"},
    {DT_CMD_B_UP, "nudge-b-up", '.', "components", "selected component: b +0.5 km/s, held", 0.5, "km/s"},
    {DT_CMD_B_DOWN_COARSE, "nudge-b-down-coarse", '<', "components", "selected component: b -5 km/s, held", -5.0, "km/s"},
    {DT_CMD_B_UP_COARSE, "nudge-b-up-coarse", '>', "components", "selected component: b +5 km/s, held", 5.0, "km/s"},
    {DT_CMD_LOGN_DOWN, "nudge-logn-down", '-', "components", "selected component: log N -0.02 dex, held", -0.02, "dex"},
    {DT_CMD_LOGN_UP, "nudge-logn-up", '=', "components", "selected component: log N +0.02 dex, held", 0.02, "dex"},
    {DT_CMD_LOGN_DOWN_COARSE, "nudge-logn-down-coarse", '_', "components", "selected component: log N -0.2 dex, held", -0.2, "dex"},
    {DT_CMD_LOGN_UP_COARSE, "nudge-logn-up-coarse", '+', "components", "selected component: log N +0.2 dex, held", 0.2, "dex"},
    {DT_CMD_HOLD_V, "hold-v", 'v', "components", "hold or release the selected velocity", 0, NULL},
    {DT_CMD_HOLD_B, "hold-b", 'd', "components", "hold or release the selected Doppler b", 0, NULL},
    {DT_CMD_HOLD_LOGN, "hold-logn", 'o', "components", "hold or release the selected log N", 0, NULL},
    {DT_CMD_TIE_B, "tie-b", 't', "components", "one b for all components, or each its own", 0, NULL},
    /* fit */
    {DT_CMD_REFIT, "refit", 'r', "fit", "fit now (after a change it happens anyway)", 0, NULL},
    {DT_CMD_AUTO_REFIT, "auto-refit", 'R', "fit", "switch the refit after every change on or off", 0, NULL},
    {DT_CMD_AUTOFIT, "autofit", 'A', "fit", "components from the automatic first pass", 0, NULL},
    {DT_CMD_UNDO, "undo", 'u', "fit", "undo the last change", 0, NULL},
    {DT_CMD_REDO, "redo", 'U', "fit", "redo what was undone", 0, NULL},
    {DT_CMD_SWITCH_DOUBLET, "switch-doublet", 'D', "fit", "next doublet covered by the spectrum", 0, NULL},
    {DT_CMD_LINK_SPECIES, "link-species", 'S', "fit", "link or unlink a species fitted jointly (a chooser)", 0, NULL},
    {DT_CMD_B_RULE, "b-rule", 'T', "fit", "how linked species share b: same, thermal, free", 0, NULL},
    {DT_CMD_COVERING, "covering", 'P', "fit", "partial covering: a covering factor per component, or none", 0, NULL},
    /* verdict */
    {DT_CMD_VERDICT_DETECTED, "verdict-detected", 'y', "verdict", "detected, then the next spectrum", 0, NULL},
    {DT_CMD_VERDICT_NOT_DETECTED, "verdict-not-detected", 'n', "verdict", "not detected, then the next spectrum", 0, NULL},
    {DT_CMD_VERDICT_UNSURE, "verdict-unsure", 'm', "verdict", "unsure (maybe), then the next spectrum", 0, NULL},
    {DT_CMD_VERDICT_UNUSABLE, "verdict-unusable", 'b', "verdict", "bad data, cannot tell; then the next", 0, NULL},
    {DT_CMD_NEXT_SYSTEM, "next-system", 's', "verdict", "select the next absorber system: the verdict keys judge it", 0, NULL},
    {DT_CMD_EDIT_NOTE, "edit-note", 'e', "verdict", "write a note (Enter keeps it, Esc drops it)", 0, NULL},
    /* queue */
    {DT_CMD_NEXT_SPECTRUM, "next-spectrum", 'j', "queue", "next spectrum of the queue", 0, NULL},
    {DT_CMD_PREV_SPECTRUM, "previous-spectrum", 'k', "queue", "previous spectrum of the queue", 0, NULL},
    {DT_CMD_NEXT_UNJUDGED, "next-unjudged", 'J', "queue", "jump to the next spectrum without a verdict", 0, NULL},
    {DT_CMD_PREV_UNJUDGED, "previous-unjudged", 'K', "queue", "back to the previous spectrum without a verdict", 0, NULL},
    {DT_CMD_GOTO_SPECTRUM, "goto-spectrum", 'g', "queue", "type a number or a name to go to that spectrum", 0, NULL},
};

#define NTABLE (sizeof table / sizeof table[0])

const dt_keybind *dt_keymap_table(size_t *n) {
  if (n) *n = NTABLE;
  return table;
}

dt_cmd dt_keymap_lookup(int key) {
  if (key == 8) key = DT_KEY_BACKSPACE; /* ^H and DEL are the same key to people */
  for (size_t i = 0; i < NTABLE; i++)
    if (table[i].key == key) return table[i].cmd;
  return DT_CMD_NONE;
}

const dt_keybind *dt_keymap_of(dt_cmd cmd) {
  for (size_t i = 0; i < NTABLE; i++)
    if (table[i].cmd == cmd) return &table[i];
  return NULL;
}

const dt_keybind *dt_keymap_find(const char *name) {
  for (size_t i = 0; i < NTABLE; i++)
    if (!strcmp(table[i].name, name)) return &table[i];
  return NULL;
}

static const struct { int key; const char *name; } special[] = {
    {DT_KEY_TAB, "Tab"},       {DT_KEY_ENTER, "Enter"},   {DT_KEY_ESC, "Esc"},
    {DT_KEY_BACKSPACE, "Backspace"}, {' ', "Space"},      {DT_KEY_LEFT, "Left"},
    {DT_KEY_RIGHT, "Right"},   {DT_KEY_UP, "Up"},         {DT_KEY_DOWN, "Down"},
    {DT_KEY_PGUP, "PgUp"},     {DT_KEY_PGDN, "PgDn"},     {DT_KEY_HOME, "Home"},
    {DT_KEY_END, "End"},       {DT_KEY_BTAB, "S-Tab"},    {DT_KEY_DELETE, "Del"},
};

const char *dt_keymap_keyname(int key, char *buf, size_t size) {
  for (size_t i = 0; i < sizeof special / sizeof special[0]; i++)
    if (special[i].key == key) {
      snprintf(buf, size, "%s", special[i].name);
      return buf;
    }
  if (key > 0 && key < 32)
    snprintf(buf, size, "^%c", '@' + key);
  else if (key > 32 && key < 127)
    snprintf(buf, size, "%c", key);
  else
    snprintf(buf, size, "<%d>", key);
  return buf;
}

int dt_keymap_keycode(const char *name) {
  if (!name || !*name) return -1;
  for (size_t i = 0; i < sizeof special / sizeof special[0]; i++)
    if (!strcmp(special[i].name, name)) return special[i].key;
  if (name[0] == '^' && name[1] >= '@' && name[1] <= '_' && !name[2]) return name[1] - '@';
  if ((unsigned char)name[0] > 32 && (unsigned char)name[0] < 127 && !name[1]) return name[0];
  return -1;
}
