/* A wavelength window: the one type that the judgement (its continuum
 * windows) and the continuum fit (the pixels it uses) share, kept apart so
 * that neither header needs the other. */
#ifndef DOUBLETTY_WINDOW_H
#define DOUBLETTY_WINDOW_H

typedef struct dt_window { double lo, hi; } dt_window;   /* vacuum Angstrom, lo < hi */

#endif
