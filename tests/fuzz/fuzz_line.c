/* libFuzzer target: the line-file parser (se_line_parse_string: YAML, keys, units, checks, and
 * se_line_prepare with catenaries and the distance map). */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/line.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    char *text;
    se_line *line;
    se_error err;
    if (size > 65536)
        return 0;
    text = malloc(size + 1);
    if (text == NULL)
        return 0;
    memcpy(text, data, size);
    text[size] = '\0';
    se_error_clear(&err);
    line = se_line_parse_string(text, "fuzz.yaml", &err);
    if (line == NULL && (err.code == 0 || err.message[0] == '\0'))
        abort();
    if (line != NULL) {
        se_expected_event *ev = NULL;
        size_t n = 0;
        if (se_line_expected_events(line, &ev, &n, &err) == SE_OK)
            free(ev);
    }
    se_line_free(line);
    free(text);
    return 0;
}
