/* strandecho CLI: the reference pulse of a recording. A copy of cmd_locate.c's loader, shared by the
 * newer commands (locate keeps its own until its owner moves it here). */
#include "cli_reference.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"
#include "strandecho/digest.h"
#include "strandecho/pulse.h"

int se_cli_load_reference(const char *pulse, unsigned long pulse_channel, const se_recording *rec,
                          se_locate_config *cfg, double **owned, char *desc, size_t dsize, char *sha,
                          int *have_sha)
{
    se_error err;
    se_error_clear(&err);
    *have_sha = 0;
    if (pulse_channel > 0) {
        const double *p;
        size_t b, e;
        if (pulse_channel > rec->channels)
            return se_cli_fail(SE_EXIT_USAGE, "--pulse-channel %lu: %s has %u channel%s",
                               pulse_channel, rec->path, rec->channels, rec->channels == 1 ? "" : "s");
        p = se_recording_channel(rec, (unsigned)(pulse_channel - 1));
        if (se_pulse_support(p, rec->frames, &b, &e, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_DATA, "%s channel %lu: %s", rec->path, pulse_channel,
                               err.message);
        *owned = malloc((e - b) * sizeof **owned);
        if (*owned == NULL)
            return se_cli_fail(SE_EXIT_MEMORY, "out of memory for the reference pulse");
        memcpy(*owned, p + b, (e - b) * sizeof **owned);
        cfg->reference = *owned;
        cfg->reference_length = e - b;
        cfg->reference_offset = b;
        cfg->pilot = se_recording_channel(rec, (unsigned)(pulse_channel - 1)); /* repeated shots */
        cfg->reference_kind = SE_REF_CHANNEL;
        snprintf(desc, dsize, "channel %lu", pulse_channel);
        return SE_EXIT_OK;
    }
    if (pulse == NULL) {
        cfg->reference_kind = SE_REF_SELF;
        snprintf(desc, dsize, "self (direct arrival in the response)");
        return SE_EXIT_OK;
    }
    if (se_pulse_is_spec(pulse) || (strchr(pulse, ':') != NULL && access(pulse, F_OK) != 0)) {
        se_pulse_shape shape;
        size_t n;
        if (se_pulse_parse(pulse, &shape, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--pulse %s: not a file, and %s", pulse, err.message);
        if (se_pulse_render(&shape, rec->rate, owned, &n, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--pulse %s: %s", pulse, err.message);
        cfg->reference = *owned;
        cfg->reference_length = n;
        cfg->reference_offset = SIZE_MAX;
        cfg->reference_kind = SE_REF_SYNTHETIC;
        se_pulse_describe(&shape, desc, dsize);
        return SE_EXIT_OK;
    }
    {
        se_recording *pr = se_recording_read(pulse, NULL, &err);
        size_t b, e;
        if (pr == NULL)
            return se_cli_fail_err(&err, 0);
        if (fabs(pr->rate - rec->rate) > 1e-9 * rec->rate) {
            int code = se_cli_fail(SE_EXIT_DATA,
                                   "%s: sample rate %.10g Hz differs from the recording's %.10g Hz",
                                   pulse, pr->rate, rec->rate);
            se_recording_free(pr);
            return code;
        }
        if (se_pulse_support(pr->data, pr->frames, &b, &e, &err) != SE_OK) {
            int code = se_cli_fail(SE_EXIT_DATA, "%s: %s", pulse, err.message);
            se_recording_free(pr);
            return code;
        }
        *owned = malloc((e - b) * sizeof **owned);
        if (*owned == NULL) {
            se_recording_free(pr);
            return se_cli_fail(SE_EXIT_MEMORY, "out of memory for the reference pulse");
        }
        memcpy(*owned, pr->data + b, (e - b) * sizeof **owned);
        se_recording_free(pr);
        if (se_sha256_file(pulse, sha, &err) != SE_OK)
            return se_cli_fail_err(&err, 0);
        *have_sha = 1;
        cfg->reference = *owned;
        cfg->reference_length = e - b;
        cfg->reference_offset = SIZE_MAX;
        cfg->reference_kind = SE_REF_FILE;
        snprintf(desc, dsize, "file %s", pulse);
        return SE_EXIT_OK;
    }
}
