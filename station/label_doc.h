/* label_doc: one image's label mask being edited, with undo and redo — pure
 * arithmetic on bytes, no SDL and no files, so every edit is testable alone.
 *
 * The mask holds one byte per pixel: a class index, or LABEL_UNLABELLED
 * (255), which training never samples (core/trainset.h).  Pixel (x, y) is
 * centred at (x, y).  Edits:
 * - a dab is the disc of pixels whose centres lie within r of (cx, cy):
 *   (x - cx)² + (y - cy)² <= r², r >= 0 (r = 0 is the one pixel);
 * - a line from (x0, y0) to (x1, y1) dabs at the n = max(|dx|, |dy|) points
 *   (x0 + round(k dx / n), y0 + round(k dy / n)), k = 1..n (rounding half
 *   away from zero), so a fast mouse leaves no gaps; the start point is the
 *   previous dab's and is not dabbed again;
 * - a fill sets the 4-connected region around the seed whose colour in the
 *   picture differs from the seed's colour by at most tol in every channel
 *   (max |channel - seed channel| <= tol, on the stored 8-bit RGB values).
 *   It walks with an explicit queue (no recursion), so its memory is bounded
 *   by 5 bytes per pixel whatever the region's shape.
 * Edits between label_doc_begin and label_doc_end are one step of the
 * history.  A step stores only the 32x32 tiles it changed, before and after
 * (2 KiB a tile), never whole masks; the history keeps the newest steps
 * whose tiles fit in undo_cap bytes and forgets older ones (a single step
 * larger than the cap is kept alone).  A new step discards what could be
 * redone.  A doc owns its mask and history. */
#ifndef ST_LABEL_DOC_H
#define ST_LABEL_DOC_H

#include <stddef.h>
#include <stdint.h>

#include "core/image.h"

#define LABEL_UNLABELLED 255
#define LABEL_TILE 32
#define LABEL_UNDO_CAP (64u << 20)

struct label_doc;

/* A doc of w x h unlabelled pixels. */
struct label_doc *label_doc_new(int w, int h, size_t undo_cap, struct err *e);
void label_doc_free(struct label_doc *d);

int label_doc_w(const struct label_doc *d);
int label_doc_h(const struct label_doc *d);
const uint8_t *label_doc_mask(const struct label_doc *d);

/* Replaces the whole mask (w * h bytes) and forgets the history: the state
 * loaded is the saved state. */
void label_doc_set_mask(struct label_doc *d, const uint8_t *mask);

void label_doc_begin(struct label_doc *d);
void label_doc_dab(struct label_doc *d, int cx, int cy, int r, uint8_t v);
void label_doc_line(struct label_doc *d, int x0, int y0, int x1, int y1, int r, uint8_t v);
/* Fills from the seed (x, y) by the colours of rgb (same size, 3 channels);
 * *filled gets the region's pixel count (0 for a seed outside). */
int label_doc_fill(struct label_doc *d, const struct image *rgb, int x, int y, int tol, uint8_t v,
                   size_t *filled, struct err *e);
/* Closes the step; one that changed nothing leaves no trace. */
int label_doc_end(struct label_doc *d, struct err *e);

/* 1 when a step was undone (redone), 0 when there was none. */
int label_doc_undo(struct label_doc *d);
int label_doc_redo(struct label_doc *d);
int label_doc_can_undo(const struct label_doc *d);
int label_doc_can_redo(const struct label_doc *d);

/* Whether the mask differs (by history) from the last loaded or saved state. */
int label_doc_dirty(const struct label_doc *d);
void label_doc_mark_saved(struct label_doc *d);

size_t label_doc_labelled(const struct label_doc *d);   /* pixels not 255 */
size_t label_doc_history_bytes(const struct label_doc *d);

#endif
