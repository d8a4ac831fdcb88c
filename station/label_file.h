/* label_file: reading and writing one label mask of a dataset
 * (core/dataset.h) for the labelling tool.
 *
 * A mask is read only when it matches its picture: 1 channel of bit depth
 * <= 8, the picture's size, and every value a class index below nclasses
 * or 255 (unlabelled); anything else is refused with one line naming the
 * file.  A mask is written as an 8-bit grey PNG to PATH.tmp, flushed to
 * disk and renamed over PATH, so a crash leaves the old mask or the new one,
 * never half of either; the labels/ folder is made when missing. */
#ifndef ST_LABEL_FILE_H
#define ST_LABEL_FILE_H

#include "core/image.h"

int label_file_load(const char *path, int w, int h, int nclasses, struct image **out,
                    struct err *e);
int label_file_save(const char *path, const struct image *mask, struct err *e);

#endif
