/* strandecho: the safety cautions shown in every report (REFERENCE.md section 4 sources). */
#ifndef SE_CAUTION_H
#define SE_CAUTION_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* One line for the end of a terminal report: mechanical (electrical = 0) or electrical line. */
const char *se_caution_line(int electrical);

/* The full list of cautions, [size: *count] static strings, each one paragraph. */
const char *const *se_cautions(size_t *count);

#ifdef __cplusplus
}
#endif

#endif /* SE_CAUTION_H */
