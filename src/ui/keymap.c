/* The key table of the inspector (see keymap.h).
 *
 * The layout is meant to be learnt in one sitting: verdicts sit together on
 * the bottom row (y n m b: yes / no / maybe / bad data); components are
 * nudged with paired keys, lower case fine and shifted coarse -- brackets
 * move a component in velocity, angle keys (< >) make it narrower or
 * wider, minus/plus lower or raise its column density; shifted letters V B
 * N freeze the parameter with that initial; h/l pan and j/k walk the queue;
 * arrows move the cursor. */
#include "keymap.h"

#include <stdio.h>
#include <string.h>

#define CTRL(c) ((c) & 0x1f)

static const dt_keybind table[] = {
    /* program */
    {DT_CMD_HELP, "help", '?', "program", "show or hide this list of keys"},
    {DT_CMD_QUIT, "quit", 'q', "program", "leave (every judgement is already saved)"},
    {DT_CMD_REDRAW, "redraw", CTRL('L'), "program", "redraw the whole screen"},
    /* cursor and view */
    {DT_CMD_CURSOR_LEFT, "cursor-left", DT_KEY_LEFT, "cursor and view", "move the cursor one column left"},
    {DT_CMD_CURSOR_RIGHT, "cursor-right", DT_KEY_RIGHT, "cursor and view", "move the cursor one column right"},
    {DT_CMD_CURSOR_LEFT_FAST, "cursor-left-fast", 'H', "cursor and view", "move the cursor eight columns left"},
    {DT_CMD_CURSOR_RIGHT_FAST, "cursor-right-fast", 'L', "cursor and view", "move the cursor eight columns right"},
    {DT_CMD_CURSOR_UP, "cursor-up", DT_KEY_UP, "cursor and view", "cursor to the panel above"},
    {DT_CMD_CURSOR_DOWN, "cursor-down", DT_KEY_DOWN, "cursor and view", "cursor to the panel below"},
    {DT_CMD_ZOOM_IN, "zoom-in", 'z', "cursor and view", "narrower velocity range, centred on the cursor"},
    {DT_CMD_ZOOM_OUT, "zoom-out", 'Z', "cursor and view", "wider velocity range"},
    {DT_CMD_PAN_LEFT, "pan-left", 'h', "cursor and view", "shift the view to lower velocities"},
    {DT_CMD_PAN_RIGHT, "pan-right", 'l', "cursor and view", "shift the view to higher velocities"},
    {DT_CMD_VIEW_RESET, "view-reset", '0', "cursor and view", "show the whole fit window again"},
    {DT_CMD_TOGGLE_NORMALISED, "toggle-normalised", 'f', "cursor and view", "panels: normalised flux or raw flux"},
    /* continuum */
    {DT_CMD_WINDOW_MARK, "window-mark", 'w', "continuum", "start, then finish, a continuum window at the cursor"},
    {DT_CMD_WINDOW_UNMARK, "window-unmark", 'W', "continuum", "remove the continuum window under the cursor"},
    {DT_CMD_CONT_ORDER_UP, "continuum-order-up", 'c', "continuum", "raise the continuum polynomial order"},
    {DT_CMD_CONT_ORDER_DOWN, "continuum-order-down", 'C', "continuum", "lower the order (below 0: fixed at 1)"},
    /* components */
    {DT_CMD_ADD_COMPONENT, "add-component", 'a', "components", "add a component at the cursor velocity"},
    {DT_CMD_REMOVE_COMPONENT, "remove-component", 'x', "components", "remove the selected component"},
    {DT_CMD_NEXT_COMPONENT, "next-component", DT_KEY_TAB, "components", "select the next component"},
    {DT_CMD_PREV_COMPONENT, "previous-component", DT_KEY_BTAB, "components", "select the previous component"},
    {DT_CMD_V_DOWN, "nudge-v-down", '[', "components", "selected component: velocity -2 km/s"},
    {DT_CMD_V_UP, "nudge-v-up", ']', "components", "selected component: velocity +2 km/s"},
    {DT_CMD_V_DOWN_COARSE, "nudge-v-down-coarse", '{', "components", "selected component: velocity -20 km/s"},
    {DT_CMD_V_UP_COARSE, "nudge-v-up-coarse", '}', "components", "selected component: velocity +20 km/s"},
    {DT_CMD_B_DOWN, "nudge-b-down", ',', "components", "selected component: b -0.5 km/s"},
    {DT_CMD_B_UP, "nudge-b-up", '.', "components", "selected component: b +0.5 km/s"},
    {DT_CMD_B_DOWN_COARSE, "nudge-b-down-coarse", '<', "components", "selected component: b -5 km/s"},
    {DT_CMD_B_UP_COARSE, "nudge-b-up-coarse", '>', "components", "selected component: b +5 km/s"},
    {DT_CMD_LOGN_DOWN, "nudge-logn-down", '-', "components", "selected component: log N -0.02"},
    {DT_CMD_LOGN_UP, "nudge-logn-up", '=', "components", "selected component: log N +0.02"},
    {DT_CMD_LOGN_DOWN_COARSE, "nudge-logn-down-coarse", '_', "components", "selected component: log N -0.2"},
    {DT_CMD_LOGN_UP_COARSE, "nudge-logn-up-coarse", '+', "components", "selected component: log N +0.2"},
    {DT_CMD_FREEZE_V, "freeze-v", 'V', "components", "freeze or free the selected velocity"},
    {DT_CMD_FREEZE_B, "freeze-b", 'B', "components", "freeze or free the selected b"},
    {DT_CMD_FREEZE_LOGN, "freeze-logn", 'N', "components", "freeze or free the selected log N"},
    {DT_CMD_TIE_B, "tie-b", 't', "components", "one b for all components, or each its own"},
    /* fit */
    {DT_CMD_REFIT, "refit", 'r', "fit", "fit now (after a change it happens anyway)"},
    {DT_CMD_AUTO_REFIT, "auto-refit", 'R', "fit", "switch the refit after every change on or off"},
    {DT_CMD_AUTOFIT, "autofit", 'A', "fit", "replace the components by the automatic first pass"},
    {DT_CMD_UNDO, "undo", 'u', "fit", "undo the last change"},
    {DT_CMD_REDO, "redo", 'U', "fit", "redo what was undone"},
    {DT_CMD_SWITCH_DOUBLET, "switch-doublet", 'D', "fit", "next doublet covered by the spectrum"},
    /* verdict */
    {DT_CMD_VERDICT_DETECTED, "verdict-detected", 'y', "verdict", "detected, then the next spectrum"},
    {DT_CMD_VERDICT_NOT_DETECTED, "verdict-not-detected", 'n', "verdict", "not detected, then the next spectrum"},
    {DT_CMD_VERDICT_UNSURE, "verdict-unsure", 'm', "verdict", "unsure (maybe), then the next spectrum"},
    {DT_CMD_VERDICT_UNUSABLE, "verdict-unusable", 'b', "verdict", "bad data, cannot tell; then the next"},
    {DT_CMD_EDIT_NOTE, "edit-note", 'e', "verdict", "write a note (Enter keeps it, Esc drops it)"},
    /* queue */
    {DT_CMD_NEXT_SPECTRUM, "next-spectrum", 'j', "queue", "next spectrum of the queue"},
    {DT_CMD_PREV_SPECTRUM, "previous-spectrum", 'k', "queue", "previous spectrum of the queue"},
    {DT_CMD_NEXT_UNJUDGED, "next-unjudged", 'J', "queue", "jump to the next spectrum without a verdict"},
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
