/* dataset: the folder layout used for training and evaluation.
 *
 * DIR/images/<stem>.png holds a frame (8-bit RGB or grey); DIR/labels/<stem>.png,
 * when present, its label mask (value = class index in recipe order, 255 =
 * unlabelled).  Stems are listed in byte order so every run sees the same
 * sequence.  A dataset owns its list of stems.
 *
 * A held-out split is by whole image and by name alone: stem S is held out
 * at share F when the first 8 bytes of SHA-256(S), read as a big-endian
 * integer and divided by 2^64, are below F.  So the split needs no seed
 * and no list, an image keeps its side when others are added or removed,
 * and the same F always gives the same images (about F of them). */
#ifndef ST_DATASET_H
#define ST_DATASET_H

#include <limits.h>
#include <stddef.h>

#include "err.h"

struct dataset {
    char dir[PATH_MAX];
    int n;
    char **stems;
    int *labelled;   /* labels/<stem>.png exists */
};

int dataset_open(const char *dir, struct dataset *ds, struct err *e);
void dataset_close(struct dataset *ds);

/* Writes DIR/images/<stem>.png or DIR/labels/<stem>.png into buf. */
int dataset_image_path(const struct dataset *ds, int i, char *buf, size_t len, struct err *e);
int dataset_label_path(const struct dataset *ds, int i, char *buf, size_t len, struct err *e);

/* 1 when image i is held out at share fraction (0: none is). */
int dataset_held_out(const struct dataset *ds, int i, double fraction);

#endif
