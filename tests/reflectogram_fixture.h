/* strandecho tests: a hand-made reflectogram (trace, locate result with five events, a two-segment
 * line) shared by the plot and report tests. */
#ifndef SE_REFLECTOGRAM_FIXTURE_H
#define SE_REFLECTOGRAM_FIXTURE_H

#include "strandecho/line.h"
#include "strandecho/locate.h"

#define RATE 100000.0 /* Hz */
#define SPEED 3000.0  /* m/s */
#define T0 0.002      /* s: direct arrival in the record */
#define NS 80000      /* samples: 0.8 s, reaches 1197 m */

/* A made-up reflectogram: a smooth pulse (Hann-windowed cosine, 0.4 ms) at each event's delay on
 * low noise from a fixed-seed generator. The events are set by hand, as a locator would fill them. */
typedef struct fixture {
    double *trace;
    se_locate_result res;
    se_event ev[5];
} fixture;

/* The pulse shape placed at each event's delay, at dt seconds from its centre. */
double pulse(double dt);
/* Fill f (trace malloc'd: free(f->trace)); the events point into f->ev. */
void make_fixture(fixture *f);
/* The two-segment line the events belong to (shackle at 250 m, fixed end at 1000 m); NULL on error
 * (printed). Free with se_line_free. */
se_line *make_line(void);

#endif
