/* The key table: one key per action, unique keys and names, every action
 * documented, names lower-case words joined by hyphens, readable key names
 * that map back to the key. */
#include <ctype.h>
#include <stdio.h>
#include <string.h>

#include "harness.h"
#include "../../src/ui/keymap.h"

static int well_formed(const char *s) {
  /* [a-z0-9]+(-[a-z0-9]+)*, starting with a letter */
  if (!islower((unsigned char)s[0])) return 0;
  int prev_hyphen = 0;
  for (const char *p = s; *p; p++) {
    if (*p == '-') {
      if (prev_hyphen) return 0;
      prev_hyphen = 1;
    } else if (islower((unsigned char)*p) || isdigit((unsigned char)*p)) {
      prev_hyphen = 0;
    } else {
      return 0;
    }
  }
  return !prev_hyphen;
}

int main(void) {
  size_t n;
  const dt_keybind *t = dt_keymap_table(&n);
  CHECK(n >= 40, "the table has all the actions (%zu)", n);

  int dup_key = 0, dup_name = 0, bad_name = 0, no_help = 0, bad_keyname = 0;
  for (size_t i = 0; i < n; i++) {
    for (size_t j = i + 1; j < n; j++) {
      if (t[i].key == t[j].key) {
        dup_key++;
        printf("       key of %s and %s is the same\n", t[i].name, t[j].name);
      }
      if (!strcmp(t[i].name, t[j].name)) dup_name++;
    }
    if (!well_formed(t[i].name)) {
      bad_name++;
      printf("       badly formed name '%s'\n", t[i].name);
    }
    if (!t[i].help || strlen(t[i].help) < 5 || !t[i].group || !t[i].group[0]) {
      no_help++;
      printf("       %s has no help\n", t[i].name);
    }
    char kn[32];
    dt_keymap_keyname(t[i].key, kn, sizeof kn);
    if ((kn[0] == '<' && kn[1]) || dt_keymap_keycode(kn) != t[i].key || strchr(kn, '\t') || strchr(kn, ' ')) {
      bad_keyname++;
      printf("       key name '%s' of %s does not map back\n", kn, t[i].name);
    }
    if (dt_keymap_lookup(t[i].key) != t[i].cmd || dt_keymap_find(t[i].name) != &t[i] ||
        dt_keymap_of(t[i].cmd) != &t[i]) {
      bad_keyname++;
      printf("       lookups of %s disagree\n", t[i].name);
    }
  }
  CHECK(dup_key == 0, "every key is bound once");
  CHECK(dup_name == 0, "every action name is unique");
  CHECK(bad_name == 0, "names are lower-case words joined by hyphens");
  CHECK(no_help == 0, "every action has a group and a help line");
  CHECK(bad_keyname == 0, "key names are readable and map back to their keys");

  /* every command the inspector knows has a key */
  int missing = 0;
  for (int c = DT_CMD_NONE + 1; c < DT_CMD__COUNT; c++)
    if (!dt_keymap_of((dt_cmd)c)) {
      missing++;
      printf("       command %d has no key\n", c);
    }
  CHECK(missing == 0, "every command has a key");
  CHECK(n == (size_t)DT_CMD__COUNT - 1, "one key per command (%zu for %d)", n, DT_CMD__COUNT - 1);

  /* the actions a person vetting spectra needs, by name */
  const char *needed[] = {"quit", "help", "add-component", "remove-component", "next-component",
                          "previous-component", "window-mark", "window-unmark", "refit", "undo", "redo",
                          "zoom-in", "zoom-out", "pan-left", "pan-right", "cursor-left", "cursor-right",
                          "switch-doublet", "verdict-detected", "verdict-not-detected", "verdict-unsure",
                          "verdict-unusable", "edit-note", "next-spectrum", "previous-spectrum",
                          "next-unjudged", "previous-unjudged", "goto-spectrum", "cursor-to-velocity",
                          "tie-b", "hold-v", "hold-b", "hold-logn",
                          "continuum-order-up", "continuum-order-down", "nudge-v-up", "nudge-v-down",
                          "nudge-b-up", "nudge-b-down", "nudge-logn-up", "nudge-logn-down",
                          "nudge-v-up-coarse", "nudge-logn-down-coarse"};
  for (size_t i = 0; i < sizeof needed / sizeof needed[0]; i++)
    CHECK(dt_keymap_find(needed[i]) != NULL, "action '%s' exists", needed[i]);
  CHECK(dt_keymap_find("quit")->key == 'q', "quit is q");

  /* key names */
  char kn[32];
  CHECK(!strcmp(dt_keymap_keyname('a', kn, sizeof kn), "a"), "a");
  CHECK(!strcmp(dt_keymap_keyname('A', kn, sizeof kn), "A"), "A");
  CHECK(!strcmp(dt_keymap_keyname(26, kn, sizeof kn), "^Z"), "^Z");
  CHECK(!strcmp(dt_keymap_keyname(DT_KEY_LEFT, kn, sizeof kn), "Left"), "Left");
  CHECK(!strcmp(dt_keymap_keyname(' ', kn, sizeof kn), "Space"), "Space");
  CHECK(!strcmp(dt_keymap_keyname(DT_KEY_BTAB, kn, sizeof kn), "S-Tab"), "S-Tab");
  CHECK(dt_keymap_keycode("^L") == 12 && dt_keymap_keycode("Tab") == 9 && dt_keymap_keycode("") == -1 &&
            dt_keymap_keycode("nonsense") == -1,
        "key codes of names");
  CHECK(dt_keymap_lookup(DT_KEY_RESIZE) == DT_CMD_NONE && dt_keymap_lookup('~') == DT_CMD_NONE,
        "unbound keys do nothing");

  /* a slipped Shift (or Caps Lock) must never record a verdict: the other
   * case of a verdict key is bound to nothing, and no key of another action
   * is the other case of a verdict key */
  size_t nt = n;
  int nverdict = 0;
  for (size_t i = 0; i < nt; i++) {
    if (strncmp(t[i].name, "verdict-", 8)) continue;
    nverdict++;
    int k = t[i].key, other = k;
    if (k >= 'a' && k <= 'z') other = k - 'a' + 'A';
    else if (k >= 'A' && k <= 'Z') other = k - 'A' + 'a';
    CHECK(other == k || dt_keymap_lookup(other) == DT_CMD_NONE, "%s (%c): its other case %c is bound to nothing",
          t[i].name, k, other);
  }
  CHECK(nverdict == 4, "four verdicts in the table (%d)", nverdict);

  /* the step of a nudge is a column of the table; its help says the same */
  int nsteps = 0;
  for (size_t i = 0; i < nt; i++) {
    int nudge = !strncmp(t[i].name, "nudge-", 6);
    CHECK(nudge == (t[i].step != 0), "%s: a step exactly when it is a nudge", t[i].name);
    if (!nudge) continue;
    nsteps++;
    char want[48];
    snprintf(want, sizeof want, "%+g %s", t[i].step, t[i].unit ? t[i].unit : "?");
    CHECK(strstr(t[i].help, want) != NULL, "%s: help '%s' says '%s'", t[i].name, t[i].help, want);
    CHECK((t[i].step < 0) == (strstr(t[i].name, "-down") != NULL), "%s: the sign of its step", t[i].name);
  }
  CHECK(nsteps == 12, "twelve nudges (%d)", nsteps);
  return dt_test_done();
}
