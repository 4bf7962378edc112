/* libFuzzer target: the recording reader (se_recording_read: libsndfile formats, header checks,
 * NaN/Inf scan, text fallback) and the header probe of streamed recordings (se_recording_probe)
 * on arbitrary bytes through a temporary file named .wav. */
#include <math.h>
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
    se_recording *rec, *hdr;
    se_error err;
    FILE *fp;
    if (se_fz_path[0] == '\0')
        snprintf(se_fz_path, sizeof se_fz_path, "/tmp/se-fuzz-rec-%ld.wav", (long)getpid());
    fp = fopen(se_fz_path, "wb");
    if (fp == NULL)
        return 0;
    if (size > 0 && fwrite(data, 1, size, fp) != size) {
        fclose(fp);
        return 0;
    }
    fclose(fp);
    se_error_clear(&err);
    rec = se_recording_read(se_fz_path, &opt, &err);
    if (rec == NULL && (err.code == 0 || err.message[0] == '\0'))
        abort();
    if (rec != NULL) {
        size_t i, n = rec->frames * rec->channels;
        if (rec->frames < 1 || rec->channels < 1 || !(rec->rate > 0.0))
            abort();
        for (i = 0; i < n; i++)
            if (!isfinite(rec->data[i]))
                abort(); /* the reader promises finite samples */
    }
    se_error_clear(&err);
    hdr = se_recording_probe(se_fz_path, &err);
    if (hdr == NULL && (err.code == 0 || err.message[0] == '\0'))
        abort();
    if (hdr != NULL && (hdr->channels < 1 || !(hdr->rate > 0.0) || hdr->frames < 1 ||
                        hdr->data != NULL))
        abort();
    /* a recording the reader takes has the header the probe gives */
    if (hdr != NULL && rec != NULL && (hdr->channels != rec->channels || hdr->rate != rec->rate))
        abort();
    se_recording_free(hdr);
    se_recording_free(rec);
    remove(se_fz_path);
    return 0;
}
