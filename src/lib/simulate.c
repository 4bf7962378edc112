/* strandecho: sparse equal-travel-time lattice (Goupillaud 1961) and analytic synthesis of records. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <fftw3.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "internal.h"
#include "strandecho/skin.h"
#include "strandecho/simulate.h"

/* A wave in flight on a segment: the cell at which it reaches the next node, its amplitude there. */
typedef struct se_sim_wave {
    int64_t cell;
    double amp;
} se_sim_wave;

/* A delay line: FIFO of waves in strictly increasing arrival cell (ring buffer, capacity a power
 * of two). */
typedef struct se_sim_fifo {
    se_sim_wave *buf;
    size_t cap, head, count;
} se_sim_fifo;

/* The run: nodes 0 (source) .. N (far end); segment s (1..N) joins nodes s-1 and s. */
typedef struct se_sim_run {
    size_t n;              /* interfaces N */
    int64_t *cell;         /* [N+1] node cells, cell[0] = 0 */
    double *refl;          /* [N+1] node coefficients, refl[0] = r_s */
    double *gain;          /* [N+1] loss factor of segment s over its length, gain[0] unused */
    se_sim_fifo *down;     /* [N+1] down[s]: waves travelling from node s-1 to node s */
    se_sim_fifo *up;       /* [N+1] up[s]: waves travelling from node s to node s-1 */
    size_t leaves;         /* power of two >= N+1 */
    int64_t *key;          /* [leaves] next meeting cell per node (INT64_MAX: none) */
    size_t *tree;          /* [2 leaves] tournament tree of node indices, tree[1] = earliest */
    int64_t horizon;       /* last arrival cell wanted */
    double floor;          /* absolute amplitude floor */
    se_sim_arrival *out;   /* arrivals so far */
    size_t n_out, cap_out;
    double quantum;
} se_sim_run;

static se_status se_sim_check_line(const se_sim_line *line, se_error *err);
static se_status se_sim_check_record(const se_sim_record *rec, size_t *frames, se_error *err);
static se_status se_sim_check_all(const se_sim_line *line, const se_sim_record *rec, size_t frames,
                                  se_error *err);
static se_status se_sim_run_init(se_sim_run *run, const se_sim_line *line, double horizon_s,
                                 double quantum, double floor, se_error *err);
static void se_sim_run_free(se_sim_run *run);
static se_status se_sim_run_lattice(se_sim_run *run, se_error *err);
static se_status se_sim_emit(se_sim_run *run, se_sim_fifo *f, size_t dest, int64_t cell, double amp,
                             se_error *err);
static se_status se_sim_fifo_push(se_sim_fifo *f, int64_t cell, double amp, se_error *err);
static void se_sim_update(se_sim_run *run, size_t node);
static int se_sim_reflector_cmp(const void *a, const void *b);

/* Largest cell count accepted for interface times and horizons (exact in double and int64). */
#define SE_SIM_MAX_CELLS 4503599627370496.0 /* 2^52 */

static se_status se_sim_check_line(const se_sim_line *line, se_error *err)
{
    size_t i;
    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: line is NULL");
    if (line->n_interfaces == 0 || line->interfaces == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: the line needs at least one interface (the far end)");
    if (!isfinite(line->source_reflection) || fabs(line->source_reflection) > 1.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: source reflection %g is not in [-1, 1]",
                       line->source_reflection);
    if (!isfinite(line->loss_np_per_s) || line->loss_np_per_s < 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: loss %g Np/s is not a finite value >= 0",
                       line->loss_np_per_s);
    for (i = 0; i < line->n_interfaces; i++) {
        const se_sim_interface *f = &line->interfaces[i];
        if (!isfinite(f->one_way_s) || f->one_way_s <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "simulate: interface %zu: one-way time %g s is not finite > 0",
                           i, f->one_way_s);
        if (i > 0 && f->one_way_s <= line->interfaces[i - 1].one_way_s)
            return se_fail(err, SE_ERR_RANGE,
                           "simulate: interface %zu: one-way time %.12g s does not increase (previous %.12g s)",
                           i, f->one_way_s, line->interfaces[i - 1].one_way_s);
        if (!isfinite(f->reflection) || fabs(f->reflection) > 1.0)
            return se_fail(err, SE_ERR_RANGE, "simulate: interface %zu: reflection %g is not in [-1, 1]", i,
                           f->reflection);
    }
    return SE_OK;
}

size_t se_sim_frames(const se_sim_record *rec)
{
    double x;
    if (rec == NULL || !isfinite(rec->rate_hz) || !isfinite(rec->duration_s) || rec->rate_hz <= 0.0 ||
        rec->rate_hz > 1e9 || rec->duration_s <= 0.0)
        return 0;
    /* a product within 1e-9 relative of an integer is that integer (0.1 s x 48 kHz is 4800) */
    x = rec->duration_s * rec->rate_hz;
    if (fabs(x - nearbyint(x)) <= 1e-9 * fmax(1.0, fabs(x)))
        x = nearbyint(x);
    x = floor(x) + 1.0;
    if (!(x <= (double)SE_SIM_MAX_FRAMES))
        return 0;
    return (size_t)x;
}

static se_status se_sim_check_record(const se_sim_record *rec, size_t *frames, se_error *err)
{
    if (rec == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: record is NULL");
    if (!isfinite(rec->rate_hz) || rec->rate_hz <= 0.0 || rec->rate_hz > 1e9)
        return se_fail(err, SE_ERR_RANGE, "simulate: sample rate %g Hz is not in (0, 1e9]", rec->rate_hz);
    if (!isfinite(rec->duration_s) || rec->duration_s <= 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: record duration %g s is not finite > 0", rec->duration_s);
    *frames = se_sim_frames(rec);
    if (*frames == 0)
        return se_fail(err, SE_ERR_NOMEM, "simulate: %g s at %g Hz is %.6g frames, more than the limit %zu",
                       rec->duration_s, rec->rate_hz, floor(rec->duration_s * rec->rate_hz) + 1.0,
                       SE_SIM_MAX_FRAMES);
    if (!isfinite(rec->pulse_start_s) || rec->pulse_start_s < 0.0 || rec->pulse_start_s > rec->duration_s)
        return se_fail(err, SE_ERR_RANGE, "simulate: pulse start %g s is not in [0, %g] s", rec->pulse_start_s,
                       rec->duration_s);
    {
        se_status ps = se_pulse_check(&rec->pulse, err);
        if (ps != SE_OK)
            return ps;
    }
    if (!isfinite(rec->noise_rms) || rec->noise_rms < 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: noise rms %g is not finite >= 0", rec->noise_rms);
    if (rec->oversample > 1048576)
        return se_fail(err, SE_ERR_RANGE, "simulate: oversampling %zu is more than 1048576", rec->oversample);
    if (!isfinite(rec->amplitude_floor) || rec->amplitude_floor < 0.0 || rec->amplitude_floor >= 1.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: amplitude floor %g is not in [0, 1)", rec->amplitude_floor);
    return SE_OK;
}

/* The record, the line, and frames against the record's length (se_simulate's checks). */
static se_status se_sim_check_all(const se_sim_line *line, const se_sim_record *rec, size_t frames,
                                  se_error *err)
{
    size_t want = 0;
    se_status st = se_sim_check_record(rec, &want, err);
    if (st != SE_OK)
        return st;
    if ((st = se_sim_check_line(line, err)) != SE_OK)
        return st;
    if (frames != want)
        return se_fail(err, SE_ERR_ARG, "simulate: %zu frames given, the record has %zu", frames, want);
    return SE_OK;
}

static se_status se_sim_run_init(se_sim_run *run, const se_sim_line *line, double horizon_s,
                                 double quantum, double floor_abs, se_error *err)
{
    size_t i, n = line->n_interfaces;
    double h;
    memset(run, 0, sizeof *run);
    run->n = n;
    run->quantum = quantum;
    run->floor = floor_abs;
    /* within 1e-9 relative of a whole cell counts as that cell (60 s / (1 / 49152000 Hz)) */
    h = horizon_s / quantum;
    if (fabs(h - nearbyint(h)) <= 1e-9 * fmax(1.0, h))
        h = nearbyint(h);
    h = floor(h);
    if (!(h < SE_SIM_MAX_CELLS))
        return se_fail(err, SE_ERR_RANGE, "simulate: horizon %g s is %.6g cells of %g s, more than 2^52",
                       horizon_s, h, quantum);
    run->horizon = (int64_t)h;
    run->leaves = 1;
    while (run->leaves < n + 1)
        run->leaves *= 2;
    run->cell = se_calloc(n + 1, sizeof *run->cell, "simulate: node cells", err);
    run->refl = run->cell ? se_calloc(n + 1, sizeof *run->refl, "simulate: node coefficients", err) : NULL;
    run->gain = run->refl ? se_calloc(n + 1, sizeof *run->gain, "simulate: segment losses", err) : NULL;
    run->down = run->gain ? se_calloc(n + 1, sizeof *run->down, "simulate: delay lines", err) : NULL;
    run->up = run->down ? se_calloc(n + 1, sizeof *run->up, "simulate: delay lines", err) : NULL;
    run->key = run->up ? se_calloc(run->leaves, sizeof *run->key, "simulate: node keys", err) : NULL;
    run->tree = run->key ? se_calloc(2 * run->leaves, sizeof *run->tree, "simulate: node tree", err) : NULL;
    if (run->tree == NULL)
        return SE_ERR_NOMEM;
    run->refl[0] = line->source_reflection;
    for (i = 1; i <= n; i++) {
        double t = line->interfaces[i - 1].one_way_s, c = nearbyint(t / quantum);
        if (!(c < SE_SIM_MAX_CELLS))
            return se_fail(err, SE_ERR_RANGE, "simulate: interface %zu at %g s is more than 2^52 cells of %g s",
                           i - 1, t, quantum);
        if (c < 1.0)
            return se_fail(err, SE_ERR_RANGE,
                           "simulate: interface %zu at %g s falls in cell 0 (quantum %g s): raise the oversampling",
                           i - 1, t, quantum);
        run->cell[i] = (int64_t)c;
        if (run->cell[i] <= run->cell[i - 1])
            return se_fail(err, SE_ERR_RANGE,
                           "simulate: interfaces %zu and %zu (%.12g s, %.12g s) fall in the same cell of %g s: "
                           "raise the oversampling",
                           i - 2, i - 1, line->interfaces[i - 2].one_way_s, t, quantum);
        run->refl[i] = line->interfaces[i - 1].reflection;
        /* amplitude decays as exp(-alpha * time travelled) over the segment's quantised length */
        run->gain[i] = exp(-line->loss_np_per_s * (double)(run->cell[i] - run->cell[i - 1]) * quantum);
    }
    for (i = 0; i < run->leaves; i++)
        run->key[i] = INT64_MAX;
    for (i = 0; i < run->leaves; i++)
        run->tree[run->leaves + i] = i;
    for (i = run->leaves - 1; i >= 1; i--) {
        size_t a = run->tree[2 * i], b = run->tree[2 * i + 1];
        run->tree[i] = run->key[b] < run->key[a] ? b : a;
    }
    return SE_OK;
}

static void se_sim_run_free(se_sim_run *run)
{
    size_t i;
    if (run->down != NULL)
        for (i = 0; i <= run->n; i++)
            free(run->down[i].buf);
    if (run->up != NULL)
        for (i = 0; i <= run->n; i++)
            free(run->up[i].buf);
    free(run->cell);
    free(run->refl);
    free(run->gain);
    free(run->down);
    free(run->up);
    free(run->key);
    free(run->tree);
    free(run->out);
    memset(run, 0, sizeof *run);
}

static se_status se_sim_fifo_push(se_sim_fifo *f, int64_t cell, double amp, se_error *err)
{
    if (f->count == f->cap) {
        size_t cap = f->cap ? 2 * f->cap : 16, i;
        se_sim_wave *nb = se_calloc(cap, sizeof *nb, "simulate: delay line", err);
        if (nb == NULL)
            return SE_ERR_NOMEM;
        for (i = 0; i < f->count; i++)
            nb[i] = f->buf[(f->head + i) & (f->cap - 1)];
        free(f->buf);
        f->buf = nb;
        f->cap = cap;
        f->head = 0;
    }
    f->buf[(f->head + f->count) & (f->cap - 1)] = (se_sim_wave){cell, amp};
    f->count++;
    return SE_OK;
}

/* Put a wave on a delay line towards node dest, arriving at cell with amplitude amp (loss applied),
 * unless it is zero, below the floor, or could not reach the sensor (cell[0] = 0) within the horizon. */
static se_status se_sim_emit(se_sim_run *run, se_sim_fifo *f, size_t dest, int64_t cell, double amp,
                             se_error *err)
{
    if (amp == 0.0 || fabs(amp) < run->floor || cell > run->horizon - run->cell[dest])
        return SE_OK;
    return se_sim_fifo_push(f, cell, amp, err);
}

/* Recompute a node's next meeting cell (earliest head of its incoming delay lines) and the tree. */
static void se_sim_update(se_sim_run *run, size_t node)
{
    int64_t k = INT64_MAX;
    size_t i;
    if (node >= 1 && run->down[node].count > 0)
        k = run->down[node].buf[run->down[node].head].cell;
    if (node < run->n && run->up[node + 1].count > 0) {
        int64_t c = run->up[node + 1].buf[run->up[node + 1].head].cell;
        if (c < k)
            k = c;
    }
    run->key[node] = k;
    for (i = (run->leaves + node) / 2; i >= 1; i /= 2) {
        size_t a = run->tree[2 * i], b = run->tree[2 * i + 1];
        run->tree[i] = run->key[b] < run->key[a] ? b : a;
    }
}

static double se_sim_pop(se_sim_fifo *f, int64_t cell)
{
    double a;
    if (f->count == 0 || f->buf[f->head].cell != cell)
        return 0.0;
    a = f->buf[f->head].amp;
    f->head = (f->head + 1) & (f->cap - 1);
    f->count--;
    return a;
}

static se_status se_sim_run_lattice(se_sim_run *run, se_error *err)
{
    const size_t n = run->n;
    se_status st;
    /* unit impulse injected down-going at the source at cell 0 */
    st = se_sim_emit(run, &run->down[1], 1, run->cell[1], run->gain[1], err);
    if (st != SE_OK)
        return st;
    se_sim_update(run, 1);
    for (;;) {
        size_t node = run->tree[1];
        int64_t t = run->key[node];
        double d_in, u_in;
        if (t == INT64_MAX || t > run->horizon)
            break;
        /* coincident arrivals at one interface in one cell are merged, as the lattice does */
        d_in = node >= 1 ? se_sim_pop(&run->down[node], t) : 0.0;
        u_in = node < n ? se_sim_pop(&run->up[node + 1], t) : 0.0;
        if (node == 0) {
            if (run->n_out == run->cap_out) {
                size_t cap = run->cap_out ? 2 * run->cap_out : 64;
                se_sim_arrival *nb;
                if (run->n_out >= SE_SIM_MAX_ARRIVALS)
                    return se_fail(err, SE_ERR_NOMEM,
                                   "simulate: more than %zu arrivals before %.9g s: add loss, raise the "
                                   "amplitude floor or shorten the record",
                                   SE_SIM_MAX_ARRIVALS, (double)t * run->quantum);
                if (cap > SE_SIM_MAX_ARRIVALS)
                    cap = SE_SIM_MAX_ARRIVALS;
                nb = realloc(run->out, cap * sizeof *nb);
                if (nb == NULL)
                    return se_fail(err, SE_ERR_NOMEM, "simulate: cannot allocate %zu arrivals", cap);
                run->out = nb;
                run->cap_out = cap;
            }
            run->out[run->n_out].time_s = (double)t * run->quantum;
            run->out[run->n_out].amplitude = u_in;
            run->n_out++;
            /* the source end reflects the up-going wave down again */
            st = se_sim_emit(run, &run->down[1], 1, t + (run->cell[1] - run->cell[0]),
                             run->refl[0] * u_in * run->gain[1], err);
            if (st != SE_OK)
                return st;
            se_sim_update(run, 1);
        } else {
            const double r = run->refl[node];
            /* Goupillaud scattering; at the far end there is no U_in and D_out leaves the line */
            const double d_out = (1.0 + r) * d_in - r * u_in;
            const double u_out = r * d_in + (1.0 - r) * u_in;
            st = se_sim_emit(run, &run->up[node], node - 1, t + (run->cell[node] - run->cell[node - 1]),
                             u_out * run->gain[node], err);
            if (st != SE_OK)
                return st;
            se_sim_update(run, node - 1);
            if (node < n) {
                st = se_sim_emit(run, &run->down[node + 1], node + 1,
                                 t + (run->cell[node + 1] - run->cell[node]), d_out * run->gain[node + 1], err);
                if (st != SE_OK)
                    return st;
                se_sim_update(run, node + 1);
            }
        }
        se_sim_update(run, node);
    }
    return SE_OK;
}

se_status se_sim_arrivals_floor(const se_sim_line *line, double horizon_s, double time_quantum_s,
                                double amplitude_floor, se_sim_arrival **arrivals, size_t *n,
                                se_error *err)
{
    se_sim_run run;
    se_status st;
    if (arrivals == NULL || n == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: arrivals or count pointer is NULL");
    *arrivals = NULL;
    *n = 0;
    st = se_sim_check_line(line, err);
    if (st != SE_OK)
        return st;
    if (!isfinite(horizon_s) || horizon_s < 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: horizon %g s is not finite >= 0", horizon_s);
    if (!isfinite(time_quantum_s) || time_quantum_s <= 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: time quantum %g s is not finite > 0", time_quantum_s);
    if (!isfinite(amplitude_floor) || amplitude_floor < 0.0 || amplitude_floor >= 1.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: amplitude floor %g is not in [0, 1)", amplitude_floor);
    st = se_sim_run_init(&run, line, horizon_s, time_quantum_s, amplitude_floor, err);
    if (st == SE_OK)
        st = se_sim_run_lattice(&run, err);
    if (st != SE_OK) {
        se_sim_run_free(&run);
        return st;
    }
    *arrivals = run.out;
    *n = run.n_out;
    run.out = NULL;
    se_sim_run_free(&run);
    return SE_OK;
}

se_status se_sim_arrivals(const se_sim_line *line, double horizon_s, double time_quantum_s,
                          se_sim_arrival **arrivals, size_t *n, se_error *err)
{
    return se_sim_arrivals_floor(line, horizon_s, time_quantum_s, SE_SIM_DEFAULT_FLOOR, arrivals, n, err);
}

se_status se_simulate(const se_sim_line *line, const se_sim_record *rec, double *response,
                      double *pulse, size_t frames, se_error *err)
{
    size_t i, n_arr = 0, os;
    se_sim_arrival *arr = NULL;
    se_status st;
    double fs, t0, dur, horizon, floor_abs, sensor;
    if ((st = se_sim_check_all(line, rec, frames, err)) != SE_OK)
        return st;
    fs = rec->rate_hz;
    t0 = rec->pulse_start_s;
    dur = rec->pulse.duration_s;
    if (pulse != NULL)
        for (i = 0; i < frames; i++)
            pulse[i] = se_pulse_value(&rec->pulse, (double)i / fs - t0);
    if (response == NULL)
        return SE_OK;
    os = rec->oversample ? rec->oversample : SE_SIM_DEFAULT_OVERSAMPLE;
    floor_abs = rec->amplitude_floor > 0.0 ? rec->amplitude_floor : SE_SIM_DEFAULT_FLOOR;
    horizon = (double)(frames - 1) / fs - t0;
    if (horizon >= 0.0) {
        st = se_sim_arrivals_floor(line, horizon, 1.0 / (fs * (double)os), floor_abs, &arr, &n_arr, err);
        if (st != SE_OK)
            return st;
    }
    for (i = 0; i < frames; i++)
        response[i] = pulse != NULL ? pulse[i] : se_pulse_value(&rec->pulse, (double)i / fs - t0);
    sensor = 1.0 + line->source_reflection;
    for (i = 0; i < n_arr; i++) {
        const double tj = arr[i].time_s, a = sensor * arr[i].amplitude;
        /* p is zero outside [0, dur]: visit the samples n/fs in [t0 + tj, t0 + tj + dur], one spare
         * each side against rounding (se_pulse_value returns 0 there) */
        double lo = ceil((t0 + tj) * fs) - 1.0, hi = floor((t0 + tj + dur) * fs) + 1.0;
        size_t k, k0, k1;
        if (lo < 0.0)
            lo = 0.0;
        if (hi > (double)(frames - 1))
            hi = (double)(frames - 1);
        if (hi < lo)
            continue;
        k0 = (size_t)lo;
        k1 = (size_t)hi;
        for (k = k0; k <= k1; k++)
            response[k] += a * se_pulse_value(&rec->pulse, (double)k / fs - t0 - tj);
    }
    free(arr);
    if (rec->noise_rms > 0.0) {
        gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
        if (rng == NULL)
            return se_fail(err, SE_ERR_NOMEM, "simulate: cannot allocate the noise generator");
        gsl_rng_set(rng, rec->seed);
        for (i = 0; i < frames; i++)
            response[i] += gsl_ran_gaussian_ziggurat(rng, rec->noise_rms);
        gsl_rng_free(rng);
    }
    return SE_OK;
}

static int se_sim_reflector_cmp(const void *a, const void *b)
{
    const se_sim_reflector *x = a, *y = b;
    return (x->distance_m > y->distance_m) - (x->distance_m < y->distance_m);
}

se_status se_sim_uniform_line(double speed_m_s, const se_sim_reflector *refl, size_t n_refl,
                              double end_distance_m, double end_reflection, double source_reflection,
                              double loss_db_per_m, se_sim_interface **interfaces, se_sim_line *line,
                              se_error *err)
{
    se_sim_reflector *sorted;
    se_sim_interface *out;
    size_t i;
    if (interfaces == NULL || line == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: interfaces or line pointer is NULL");
    *interfaces = NULL;
    if (n_refl > 0 && refl == NULL)
        return se_fail(err, SE_ERR_ARG, "simulate: %zu reflectors but the array is NULL", n_refl);
    if (!isfinite(speed_m_s) || speed_m_s <= 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: speed %g m/s is not finite > 0", speed_m_s);
    if (!isfinite(end_distance_m) || end_distance_m <= 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: far end distance %g m is not finite > 0", end_distance_m);
    if (!isfinite(end_reflection) || fabs(end_reflection) > 1.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: far end reflection %g is not in [-1, 1]", end_reflection);
    if (!isfinite(source_reflection) || fabs(source_reflection) > 1.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: source reflection %g is not in [-1, 1]",
                       source_reflection);
    if (!isfinite(loss_db_per_m) || loss_db_per_m < 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: loss %g dB/m is not finite >= 0", loss_db_per_m);
    for (i = 0; i < n_refl; i++) {
        if (!isfinite(refl[i].distance_m) || refl[i].distance_m <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "simulate: reflector %zu: distance %g m is not finite > 0", i,
                           refl[i].distance_m);
        if (refl[i].distance_m >= end_distance_m)
            return se_fail(err, SE_ERR_RANGE, "simulate: reflector %zu at %g m is at or beyond the far end (%g m)",
                           i, refl[i].distance_m, end_distance_m);
        if (!isfinite(refl[i].reflection) || fabs(refl[i].reflection) > 1.0)
            return se_fail(err, SE_ERR_RANGE, "simulate: reflector %zu: reflection %g is not in [-1, 1]", i,
                           refl[i].reflection);
    }
    sorted = se_calloc(n_refl, sizeof *sorted, "simulate: reflectors", err);
    if (sorted == NULL)
        return SE_ERR_NOMEM;
    if (n_refl > 0)
        memcpy(sorted, refl, n_refl * sizeof *sorted);
    qsort(sorted, n_refl, sizeof *sorted, se_sim_reflector_cmp);
    for (i = 1; i < n_refl; i++)
        if (sorted[i].distance_m == sorted[i - 1].distance_m) {
            const double d = sorted[i].distance_m;
            free(sorted);
            return se_fail(err, SE_ERR_RANGE, "simulate: two reflectors at the same distance %g m", d);
        }
    out = se_calloc(n_refl + 1, sizeof *out, "simulate: interfaces", err);
    if (out == NULL) {
        free(sorted);
        return SE_ERR_NOMEM;
    }
    for (i = 0; i < n_refl; i++) {
        out[i].one_way_s = sorted[i].distance_m / speed_m_s;
        out[i].reflection = sorted[i].reflection;
    }
    out[n_refl].one_way_s = end_distance_m / speed_m_s;
    out[n_refl].reflection = end_reflection;
    free(sorted);
    line->interfaces = out;
    line->n_interfaces = n_refl + 1;
    line->source_reflection = source_reflection;
    /* dB of amplitude per metre -> nepers per metre (ln 10 / 20) -> per second of travel (x v) */
    line->loss_np_per_s = loss_db_per_m * log(10.0) / 20.0 * speed_m_s;
    *interfaces = out;
    return SE_OK;
}

se_status se_simulate_skin(const se_sim_line *line, const se_sim_record *rec, double skin_k_s05_per_m,
                           double speed_m_s, double *response, double *pulse, size_t frames,
                           se_error *err)
{
    size_t i, k, n_arr = 0, os, N, nb, mp;
    se_sim_arrival *arr = NULL;
    se_status st;
    double fs, t0, horizon, floor_abs, sensor, *buf = NULL;
    fftw_complex *spec = NULL, *acc = NULL;
    fftw_plan pf = NULL, pb = NULL;
    if (!isfinite(skin_k_s05_per_m) || skin_k_s05_per_m < 0.0)
        return se_fail(err, SE_ERR_RANGE, "simulate: skin loss %g s^0.5/m is not finite >= 0",
                       skin_k_s05_per_m);
    if (!isfinite(speed_m_s) || !(speed_m_s > 0.0))
        return se_fail(err, SE_ERR_RANGE, "simulate: speed %g m/s is not finite > 0", speed_m_s);
    if (skin_k_s05_per_m == 0.0)
        return se_simulate(line, rec, response, pulse, frames, err);
    if ((st = se_sim_check_all(line, rec, frames, err)) != SE_OK)
        return st;
    fs = rec->rate_hz;
    t0 = rec->pulse_start_s;
    if (pulse != NULL)
        for (i = 0; i < frames; i++)
            pulse[i] = se_pulse_value(&rec->pulse, (double)i / fs - t0);
    if (response == NULL)
        return SE_OK;
    if (frames > ((size_t)1 << 28))
        return se_fail(err, SE_ERR_NOMEM, "simulate: skin-effect synthesis of %zu frames: at most 2^28",
                       frames);
    os = rec->oversample ? rec->oversample : SE_SIM_DEFAULT_OVERSAMPLE;
    floor_abs = rec->amplitude_floor > 0.0 ? rec->amplitude_floor : SE_SIM_DEFAULT_FLOOR;
    horizon = (double)(frames - 1) / fs - t0;
    if (horizon >= 0.0) {
        st = se_sim_arrivals_floor(line, horizon, 1.0 / (fs * (double)os), floor_abs, &arr, &n_arr, err);
        if (st != SE_OK)
            return st;
    }
    N = 64;
    while (N < 2 * frames)
        N <<= 1;
    if ((double)n_arr * (double)N > 17179869184.0) { /* 2^34 */
        free(arr);
        return se_fail(err, SE_ERR_NOMEM,
                       "simulate: skin-effect synthesis of %zu arrivals on %zu points is too much work: "
                       "raise the amplitude floor or shorten the record", n_arr, N);
    }
    nb = N / 2 + 1;
    mp = (size_t)floor(rec->pulse.duration_s * fs) + 3;
    buf = fftw_malloc(N * sizeof *buf);
    spec = fftw_malloc(nb * sizeof *spec);
    acc = fftw_malloc(nb * sizeof *acc);
    if (buf == NULL || spec == NULL || acc == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "simulate: cannot allocate %zu points", N);
        goto done;
    }
    pf = fftw_plan_dft_r2c_1d((int)N, buf, spec, FFTW_ESTIMATE);
    pb = fftw_plan_dft_c2r_1d((int)N, acc, buf, FFTW_ESTIMATE);
    if (pf == NULL || pb == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "simulate: cannot plan a %zu-point transform", N);
        goto done;
    }
    memset(acc, 0, nb * sizeof *acc);
    memset(buf, 0, N * sizeof *buf);
    sensor = 1.0 + line->source_reflection;
    for (i = 0; i < n_arr; i++) {
        /* the arrival's pulse starts at (n0 + phi) / fs; sampled analytically at k - phi */
        const double start = (t0 + arr[i].time_s) * fs, n0 = floor(start), phi = start - n0;
        const double amp = sensor * arr[i].amplitude;
        const double a = skin_k_s05_per_m * speed_m_s * arr[i].time_s;
        if (n0 >= (double)frames)
            continue;
        for (k = 0; k < mp; k++)
            buf[k] = se_pulse_value(&rec->pulse, ((double)k - phi) / fs);
        fftw_execute(pf);
        for (k = 0; k < nb; k++) {
            /* amp H(j w) exp(-j w n0): loss exp(-a sqrt(w/2) (1 + j)), w rad/s; delay w rad/sample */
            const double w = 2.0 * SE_PI * (double)k / (double)N;
            const double q = a * sqrt(0.5 * w * fs);
            const double g = amp * exp(-q), ph = -(q + w * n0);
            const double hr = g * cos(ph), hi = g * sin(ph);
            acc[k][0] += spec[k][0] * hr - spec[k][1] * hi;
            acc[k][1] += spec[k][0] * hi + spec[k][1] * hr;
        }
    }
    fftw_execute(pb);
    for (i = 0; i < frames; i++) {
        response[i] = (pulse != NULL ? pulse[i] : se_pulse_value(&rec->pulse, (double)i / fs - t0)) +
                      buf[i] / (double)N;
    }
    /* the tails beyond N wrap onto the record: far out each arrival is amp s0 h(t - c) */
    {
        double s0 = 0.0, s1 = 0.0;
        for (k = 0; k < mp; k++) {
            const double pv = se_pulse_value(&rec->pulse, (double)k / fs);
            s0 += pv;
            s1 += (double)k * pv;
        }
        if (s0 != 0.0)
            for (i = 0; i < n_arr; i++) {
                const double start = (t0 + arr[i].time_s) * fs, c = start + s1 / s0;
                const double amp = sensor * arr[i].amplitude * s0;
                const double a = skin_k_s05_per_m * speed_m_s * arr[i].time_s;
                if (start >= (double)frames)
                    continue;
                /* the wrap of the slow tail (skin.h), smooth on the scale of N >= 2 frames */
                se_skin_unwrap(response, frames, N, c, amp, a, fs);
            }
    }
    if (rec->noise_rms > 0.0) {
        gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
        if (rng == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "simulate: cannot allocate the noise generator");
            goto done;
        }
        gsl_rng_set(rng, rec->seed);
        for (i = 0; i < frames; i++)
            response[i] += gsl_ran_gaussian_ziggurat(rng, rec->noise_rms);
        gsl_rng_free(rng);
    }
done:
    if (pf != NULL)
        fftw_destroy_plan(pf);
    if (pb != NULL)
        fftw_destroy_plan(pb);
    fftw_free(buf);
    fftw_free(spec);
    fftw_free(acc);
    free(arr);
    return st;
}
