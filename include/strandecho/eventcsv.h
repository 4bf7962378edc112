/* strandecho: the located events as CSV for spreadsheets.
 *
 * One header row, then one row per event in the order of res->events (by delay). The columns are
 * fields of the JSON events (docs/json.md) with the same names; each name ends in its unit where
 * it has one (_s seconds, _m metres, _db decibels). The first fourteen are in the JSON's order;
 * the last four were added later and follow them, so a spreadsheet built on the first fourteen
 * keeps its column letters:
 *   index,delay_s,delay_uncertainty_s,distance_m,distance_uncertainty_m,polarity,impedance,class,
 *   reflection,reflection_uncertainty,snr_db,low_confidence,multiple,multiple_of,
 *   predicted_multiple,previous_shot,skin_corrected,skin_shift_s
 * Numbers are SI in the C locale's format whatever the process locale ("%.10g", point as decimal
 * separator); a value that is not finite is an empty field; booleans are true/false; multiple_of
 * lists the 1-based primaries separated by ';' (empty when not a multiple or when no pair
 * explains it, e.g. an earlier tap's echo). predicted_multiple is the multiple field predicted at
 * the event (reflection units; 0 when nothing is predicted there; for a primary, reflection -
 * predicted_multiple is the reflector's own share). previous_shot is k >= 1 for a multiple
 * explained by the echoes of the tap k taps earlier, empty otherwise. skin_corrected is true when
 * the delay and amplitude come from a loss-shaped template (skin-effect loss); skin_shift_s is
 * then how much earlier than the lossless matched filter's peak the echo was placed, s (empty
 * otherwise). No field needs quoting (words and numbers only). Lines end in "\n". The same result
 * gives the same bytes. */
#ifndef SE_EVENTCSV_H
#define SE_EVENTCSV_H

#include "strandecho/error.h"
#include "strandecho/locate.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The CSV text in a NUL-terminated malloc'd string (free with free()); NULL with err filled. */
char *se_events_csv(const se_locate_result *res, se_error *err);

/* Write it to path ("-" = standard output) through se_output: complete or nothing. */
se_status se_events_csv_write(const se_locate_result *res, const char *path, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_EVENTCSV_H */
