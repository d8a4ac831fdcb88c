/* pngio: reading and writing PNG files through libpng, safely.
 *
 * Any PNG (1/2/4/8/16-bit, grey, grey+alpha, palette, RGB, RGBA, interlaced)
 * is read into an 8-bit image: pngio_load_rgb always gives 3 channels,
 * pngio_load_label gives 1 channel holding the raw sample values (palette
 * indices or grey samples), which is how class label masks are stored.
 * Alpha channels and tRNS transparency are dropped, not composited: the
 * colour samples are kept as stored.  No gamma, sBIT or bKGD is applied.
 * 16-bit samples are reduced by taking the high byte (v >> 8), as libpng's
 * png_set_strip_16 does; 1/2/4-bit grey is scaled to 0..255 for RGB
 * (v * 255 / (2^depth - 1)).  Untrusted files are bounded by IMAGE_MAX_SIDE
 * and IMAGE_MAX_PIXELS before any pixel memory is allocated.
 *
 * Every error message starts with the file path ("PATH: not a PNG file",
 * "PATH: truncated or corrupt PNG (libpng: ...)", "PATH: cannot open: ...").
 * Codes: ST_EIO when the file cannot be opened, read or written; ST_EFORMAT
 * for a wrong signature, corrupt or truncated data, or a mask of the wrong
 * type; ST_ERANGE for too many pixels or a label value that is not a class;
 * ST_ENOMEM when memory runs out; ST_ELIB when libpng fails otherwise;
 * ST_EINVAL for bad arguments.  On failure *out is NULL.  libpng's setjmp
 * never leaves this module, and the functions keep no state between calls, so
 * threads may use them at once. */
#ifndef ST_PNGIO_H
#define ST_PNGIO_H

#include "image.h"

int pngio_load_rgb(const char *path, struct image **out, struct err *e);

/* Label masks: grey or palette of bit depth <= 8 only; anything else is
 * refused, because scaling or colour conversion would corrupt class indices.
 * 1/2/4-bit samples are unpacked unscaled (0..2^depth-1).  Values >= nclasses
 * other than 255 (unlabelled) are refused with the offending value and pixel
 * position in the message. nclasses <= 0 skips that check. */
int pngio_load_label(const char *path, int nclasses, struct image **out, struct err *e);

/* Writes a 1- or 3-channel image, 8-bit, not interlaced. level is the zlib
 * level (0..9); evidence writing uses level 1 for speed, which also takes
 * the SUB filter and zlib's run-length strategy.  The file is
 * written in place: on failure a partial file may remain, so callers that
 * need atomicity write to a temporary name and rename. */
int pngio_save(const char *path, const struct image *img, int level, struct err *e);

/* The same PNG encoded into a heap buffer (*buf, *len; caller frees *buf), so
 * a caller can hash it and write it through its own I/O; what names the
 * image in messages. */
int pngio_encode_mem(const char *what, const struct image *img, int level, unsigned char **buf,
                     size_t *len, struct err *e);

#endif
