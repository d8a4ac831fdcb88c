/* civil: days since 1970-01-01 of a proleptic Gregorian date, and back.
 *
 * The era / day-of-era arithmetic known from H. Hinnant's "chrono-compatible
 * low-level date algorithms" (written here from memory), so the log's UTC
 * times, the calibration dates and the audit's days need neither timegm
 * (not in POSIX) nor the process's time zone.  Exact for every date an
 * int64_t day count holds; pure functions, no state. */
#ifndef ST_CIVIL_H
#define ST_CIVIL_H

#include <stdint.h>

/* m in 1..12, d in 1..31 (an out-of-month day rolls over, e.g. 31 April is
 * 1 May). */
int64_t civil_days(int64_t y, int m, int d);
void civil_date(int64_t days, int64_t *y, int *m, int *d);

#endif
