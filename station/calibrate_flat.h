/* calibrate_flat: `station calibrate flat`, the flat field from target frames.
 *
 * Parses the verb's command line, loads the frames, builds the field with
 * calib/flat.c and saves it (core/flatfield.h); prints one JSON line with
 * the non-uniformity before and after on stdout and a line for a person on
 * stderr.  Returns an exit_status (station/cli.h). */
#ifndef ST_CALIBRATE_FLAT_H
#define ST_CALIBRATE_FLAT_H

int calibrate_flat(int argc, char **argv);

#endif
