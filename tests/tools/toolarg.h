/* toolarg: command-line number parsing shared by the test tools. */
#ifndef ST_TOOLARG_H
#define ST_TOOLARG_H

#include <stdlib.h>

/* A whole decimal integer in [-1000000, 1000000]; 0 on success, -1 otherwise. */
static inline int parse_int(const char *s, int *v)
{
    char *end;
    long x = strtol(s, &end, 10);
    if (*s == '\0' || *end != '\0' || x < -1000000 || x > 1000000)
        return -1;
    *v = (int)x;
    return 0;
}

#endif
