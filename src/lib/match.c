/* strandecho: matching located events to the expected events of a described line. */
#include <math.h>
#include <stdlib.h>

#include "internal.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"

/* Strong enough to end the line: a free-like break reflects nearly everything (|r| ~ 1 seen
 * through the interfaces in front); 0.5 leaves room for losses and transmissions. */
#define SE_BREAK_MIN_REFLECTION 0.5

se_status se_match_expected(se_locate_result *res, const se_expected_event *expected,
                            size_t n_expected, double z, se_error *err)
{
    size_t k, i;
    int *taken_by = NULL;

    if (res == NULL)
        return se_fail(err, SE_ERR_ARG, "match: no result");
    free(res->expected_found);
    res->expected_found = NULL;
    res->n_expected = 0;
    res->end_missing = 0;
    res->break_event = -1;
    for (i = 0; i < res->n_events; i++)
        res->events[i].expected = -1;
    if (n_expected == 0 || expected == NULL)
        return SE_OK;
    res->expected_found = se_calloc(n_expected, sizeof *res->expected_found, "matches", err);
    if (res->expected_found == NULL)
        return SE_ERR_NOMEM;
    res->n_expected = n_expected;
    for (k = 0; k < n_expected; k++)
        res->expected_found[k] = -1;
    if (res->n_events > 0) {
        taken_by = se_calloc(res->n_events, sizeof *taken_by, "matches", err);
        if (taken_by == NULL)
            return SE_ERR_NOMEM;
    }
    /* Each expected event takes the nearest free event inside its window; done in order of the
     * smallest window first would be fairer, but expected events of a line are far apart compared
     * with their windows, so delay order is enough. */
    for (k = 0; k < n_expected; k++) {
        const se_expected_event *x = &expected[k];
        double best = INFINITY;
        int bi = -1;
        for (i = 0; i < res->n_events; i++) {
            const se_event *ev = &res->events[i];
            double win, d;
            if (ev->multiple || taken_by[i])
                continue;
            win = z * sqrt(ev->delay_uncertainty_s * ev->delay_uncertainty_s +
                           x->round_trip_sigma_s * x->round_trip_sigma_s) +
                  res->resolution_s;
            d = fabs(ev->delay_s - x->round_trip_s);
            if (d > win)
                continue;
            if (x->has_reflection && x->amplitude != 0.0 && ev->reflection * x->amplitude < 0.0)
                continue;
            if (d < best) {
                best = d;
                bi = (int)i;
            }
        }
        if (bi >= 0) {
            taken_by[bi] = 1;
            res->events[bi].expected = (int)k;
            res->expected_found[k] = bi;
        }
    }
    /* Past a found end nothing real is seen: later unmatched events are multiples of it. */
    for (k = 0; k < n_expected; k++) {
        int e = res->expected_found[k];
        if (expected[k].type != SE_EVENT_END || e < 0)
            continue;
        for (i = (size_t)e + 1; i < res->n_events; i++) {
            se_event *ev = &res->events[i];
            if (ev->expected < 0 && !ev->multiple) {
                ev->multiple = 1;
                ev->multiple_of[0] = e;
                ev->multiple_of[1] = -1;
            }
        }
    }
    /* The end: missing while the record reaches it means the line stops short (or is matched). */
    for (k = 0; k < n_expected; k++) {
        const se_expected_event *x = &expected[k];
        if (x->type != SE_EVENT_END || res->expected_found[k] >= 0)
            continue;
        if (x->round_trip_s <= res->record_range_s) {
            res->end_missing = 1;
            for (i = 0; i < res->n_events; i++) {
                const se_event *ev = &res->events[i];
                if (ev->expected >= 0 || ev->multiple || ev->impedance_increase)
                    continue;
                if (ev->delay_s < x->round_trip_s && fabs(ev->reflection) >= SE_BREAK_MIN_REFLECTION) {
                    res->break_event = (int)i;
                    break;
                }
            }
        }
    }
    free(taken_by);
    return SE_OK;
}
