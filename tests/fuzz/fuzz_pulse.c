/* libFuzzer target: the pulse-spec parser (se_pulse_parse), the round trip through
 * se_pulse_describe (the header promises the same shape bit for bit), and rendering of short
 * pulses at 8 kHz. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/pulse.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    se_pulse_shape a, b;
    char *text, desc[256];
    se_error err;
    if (size > 1024)
        return 0;
    text = malloc(size + 1);
    if (text == NULL)
        return 0;
    memcpy(text, data, size);
    text[size] = '\0';
    se_error_clear(&err);
    if (se_pulse_parse(text, &a, &err) == SE_OK) {
        double *s = NULL;
        size_t n = 0;
        se_pulse_describe(&a, desc, sizeof desc);
        if (se_pulse_parse(desc, &b, &err) != SE_OK)
            abort(); /* the canonical text must parse */
        if (b.kind != a.kind || b.duration_s != a.duration_s || b.freq_hz != a.freq_hz ||
            b.freq2_hz != a.freq2_hz || b.cycles != a.cycles)
            abort(); /* ... to the same shape */
        if (a.duration_s * 8000.0 < 1e5 && se_pulse_render(&a, 8000.0, &s, &n, &err) == SE_OK)
            free(s);
    } else if (err.message[0] == '\0') {
        abort();
    }
    free(text);
    return 0;
}
