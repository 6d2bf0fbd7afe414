/* The inspector's keys for linked species: the chooser that links or
 * unlinks a doublet of the table, and the b rule.  Both go through the
 * session's actions (dt_session_link, dt_session_btie_next), so the
 * session file records them and the fit is redone jointly. */
#include <string.h>

#include "insp.h"
#include "keymap.h"

size_t dt_insp_link_choices(const dt_insp *s, const dt_doublet **out) {
  return dt_session_linkable(s->ss, out, DT_INSP_CHOICES);
}

void dt_insp_link_open(dt_insp *s) {
  const dt_doublet *c[DT_INSP_CHOICES];
  if (!s->ss->loaded) {
    dt_insp_say(s, DT_TONE_WARN, "no data: nothing can be linked");
    return;
  }
  if (!dt_insp_link_choices(s, c)) {
    dt_insp_say(s, DT_TONE_WARN, "the spectrum covers no other doublet of the table");
    return;
  }
  if (!dt_session_writable(s->ss)) return;
  s->choosing = 1;
  s->choice_sel = 0;
  dt_insp_say(s, DT_TONE_TEXT, "link a species: its number (or arrows and Enter); Esc closes");
}

/* Link or unlink choice i, then close. */
static void pick(dt_insp *s, size_t i) {
  const dt_doublet *c[DT_INSP_CHOICES];
  size_t n = dt_insp_link_choices(s, c);
  s->choosing = 0;
  if (i < n) dt_session_link(s->ss, c[i]->name);
}

int dt_insp_link_key(dt_insp *s, int key) {
  const dt_doublet *c[DT_INSP_CHOICES];
  size_t n = dt_insp_link_choices(s, c);
  if (key >= '1' && key <= '9') {
    if ((size_t)(key - '1') < n) pick(s, (size_t)(key - '1'));
    else dt_insp_say(s, DT_TONE_WARN, "no species %c in the list", key);
  } else if (key == DT_KEY_UP || key == DT_KEY_DOWN) {
    if (n) s->choice_sel = (s->choice_sel + (key == DT_KEY_UP ? n - 1 : 1)) % n;
  } else if (key == DT_KEY_ENTER || key == ' ') {
    pick(s, s->choice_sel);
  } else if (key == DT_KEY_ESC || dt_keymap_lookup(key) == DT_CMD_LINK_SPECIES) {
    s->choosing = 0;
    s->ss->msg[0] = '\0';
  } else if (key != DT_KEY_RESIZE) {
    dt_insp_say(s, DT_TONE_WARN, "choosing a species: a number, arrows and Enter, or Esc");
  }
  return EV_REDRAW;
}
