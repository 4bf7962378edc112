/* strandecho CLI: loading the reference pulse of a recording (--pulse-channel N or --pulse FILE|SPEC),
 * shared by the commands that run the locator on a recording (calibrate; locate keeps its own copy). */
#ifndef SE_CLI_REFERENCE_H
#define SE_CLI_REFERENCE_H

#include <stddef.h>

#include "strandecho/locate.h"
#include "strandecho/recording.h"

/* Fill cfg's reference from channel pulse_channel (1-based, 0 = none) of rec, from pulse (a
 * recording file or a shape spec such as hann:4ms, NULL = none), or, with neither, the direct
 * arrival in the response (SE_REF_SELF). *owned receives the malloc'd samples the config borrows
 * (free() after se_locate; NULL when none). desc [size: dsize] receives a description;
 * sha [size: 65] the SHA-256 of a pulse file (*have_sha = 1). Returns SE_EXIT_OK or an exit code
 * with its one-line message printed. */
int se_cli_load_reference(const char *pulse, unsigned long pulse_channel, const se_recording *rec,
                          se_locate_config *cfg, double **owned, char *desc, size_t dsize, char *sha,
                          int *have_sha);

#endif /* SE_CLI_REFERENCE_H */
