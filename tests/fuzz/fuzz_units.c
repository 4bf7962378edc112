/* libFuzzer target: the unit parser (se_unit_parse for every kind, with and without a default
 * unit) and the reverse conversion of what it returns. First byte: kind; the rest: text. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/units.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static const char *const defaults[] = {"m", "m/s", "N", "kg/m", "N/m", "s",
                                           "Hz", "", "ohm", "N", "Pa", "kg/m3"};
    se_unit_kind kind;
    char *text;
    double si = 0.0, back;
    se_error err;
    int k;
    if (size < 1 || size > 4096)
        return 0;
    kind = (se_unit_kind)(data[0] % SE_UNIT_KIND_COUNT);
    text = malloc(size);
    if (text == NULL)
        return 0;
    memcpy(text, data + 1, size - 1);
    text[size - 1] = '\0';
    for (k = 0; k < 2; k++) {
        se_error_clear(&err);
        if (se_unit_parse(text, kind, k ? defaults[kind] : NULL, &si, &err) == SE_OK) {
            if (!isfinite(si))
                abort(); /* the parser promises a finite SI value */
            se_unit_from_si(si, kind, se_unit_si_name(kind), &back, &err);
        } else if (err.message[0] == '\0') {
            abort();
        }
    }
    free(text);
    return 0;
}
