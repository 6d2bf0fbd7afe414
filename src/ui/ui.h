/* The UI library's interface to the commands.
 *
 * A command includes this header only.  It gives the inspector (its
 * options, the screen check and the run: inspector.h), the queue of
 * spectra it works through (queue.h) and the key table that `doubletty
 * keys`, the help overlay and the manual share (keymap.h).  The rest of
 * src/ui -- the terminal (term.h), the cell grid (grid.h), plotting
 * (plot.h), the drawing and the inspector's own state (insp.h) -- is
 * private to the UI. */
#ifndef DT_UI_UI_H
#define DT_UI_UI_H
#include "inspector.h"
#include "keymap.h"
#include "queue.h"
#endif
