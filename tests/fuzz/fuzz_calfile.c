/* Fuzzes core/calfile.c's reader (jansson underneath).  Checks calfile.h's
 * promises: a loaded file has a known format, a positive frame size and
 * scale and 1..3650 valid days; a refusal names the file and leaves the
 * struct untouched. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/calfile.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "cal.json");
    struct calfile c, before;
    memset(&c, 0x5a, sizeof c);
    before = c;
    struct err e = {0};
    if (calfile_load(path, &c, &e) == ST_OK) {
        if (c.format < 1 || c.format > CALFILE_FORMAT || c.width < 1 || c.height < 1 ||
            !(c.mm_per_px_x > 0) || !(c.mm_per_px_y > 0) || c.valid_days < 1 ||
            c.valid_days > 3650)
            abort();
        char t[32];
        calfile_format_time(c.created, t, sizeof t);
    } else if (!strstr(e.msg, path) || memcmp(&c, &before, sizeof c)) {
        abort();
    }
    return 0;
}
