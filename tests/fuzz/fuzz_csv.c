/* libFuzzer target: the CSV/TSV recording reader (se_recording_read_csv) on arbitrary bytes,
 * through a temporary file (the reader takes a path). Limit 64 MiB of samples. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

#include "strandecho/recording.h"

static char se_fz_path[64];

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    se_read_options opt = {(size_t)1 << 26};
    se_recording *rec;
    se_error err;
    FILE *fp;
    if (se_fz_path[0] == '\0')
        snprintf(se_fz_path, sizeof se_fz_path, "/tmp/se-fuzz-csv-%ld.csv", (long)getpid());
    fp = fopen(se_fz_path, "wb");
    if (fp == NULL)
        return 0;
    if (size > 0 && fwrite(data, 1, size, fp) != size) {
        fclose(fp);
        return 0;
    }
    fclose(fp);
    se_error_clear(&err);
    rec = se_recording_read_csv(se_fz_path, &opt, &err);
    if (rec == NULL && (err.code == 0 || err.message[0] == '\0'))
        abort(); /* a failure must say why */
    if (rec != NULL && (rec->frames < 2 || rec->channels < 1 || !(rec->rate > 0.0)))
        abort();
    se_recording_free(rec);
    remove(se_fz_path);
    return 0;
}
