/* source_replay: the PNG files of a folder as a frame source (station/source.h).
 *
 * DIR's *.png files (or DIR/images/ when DIR is a dataset folder, see
 * core/dataset.h) in byte order of their names, each read as 8-bit RGB and
 * delivered at options.fps (0: as fast as asked), from the first again after
 * the last when options.loop is set, else SOURCE_END.  A file that cannot be
 * read is SOURCE_BAD naming it (the live station records it as NO_VERDICT,
 * unreadable, as station inspect does) and the replay goes on with the next
 * one: a bad file is reported, never silently skipped.  A folder that
 * cannot be listed or holds no PNG is an error. */
#ifndef ST_SOURCE_REPLAY_H
#define ST_SOURCE_REPLAY_H

#include "source.h"

int source_replay_open(const char *dir, const struct source_options *o, struct source **out,
                       struct err *e);

#endif
