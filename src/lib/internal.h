/* strandecho: the one private header, shared private helpers of the library. */
#ifndef SE_INTERNAL_H
#define SE_INTERNAL_H

#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include "strandecho/error.h"

#if defined(__GNUC__) || defined(__clang__)
#define SE_PRINTF(a, b) __attribute__((format(printf, a, b)))
#else
#define SE_PRINTF(a, b)
#endif

/* pi, since C11 does not define M_PI. */
#define SE_PI 3.14159265358979323846

/* Set code and a printf-style message in err (err may be NULL); returns code so
 * callers can write `return se_fail(err, SE_ERR_ARG, "...", ...);`. */
se_status se_fail(se_error *err, se_status code, const char *fmt, ...) SE_PRINTF(3, 4);

/* Allocation with overflow check of n * size; on failure fills err (SE_ERR_NOMEM,
 * naming `what`) and returns NULL. The memory is zeroed. Free with free(). */
void *se_calloc(size_t n, size_t size, const char *what, se_error *err);

/* n * size without overflow: returns 0 and sets *out on success, -1 on overflow. */
int se_mul_size(size_t n, size_t size, size_t *out);

/* strdup into malloc'd memory; NULL on failure (err filled). */
char *se_strdup(const char *s, se_error *err);

/* A growable, NUL-terminated text buffer (strbuf.c): start zeroed; once an allocation fails,
 * failed is set and further additions are ignored; the owner frees p. */
typedef struct se_strbuf {
    char *p;
    size_t len, cap;
    int failed;
} se_strbuf;
void se_strbuf_add(se_strbuf *b, const char *s, size_t n);
void se_strbuf_vprintf(se_strbuf *b, const char *fmt, va_list ap);
void se_strbuf_printf(se_strbuf *b, const char *fmt, ...) SE_PRINTF(2, 3);
/* s (NULL: nothing) with & < > " ' as XML entities and control characters but tab and newline as
 * spaces (not allowed in XML 1.0). */
void se_strbuf_xml_escape(se_strbuf *b, const char *s);

/* se_refine_peak with its answer in two parts: the integer peak *kpeak (after the uphill walk and
 * the lobe check) and the offset *tau in (-1, 1) from it, so that a caller holding r from record
 * index base forms the record lag (double)(base + *kpeak) + *tau, rounded once: the same double
 * whichever window of r it was given (se_detect_config.origin). */
se_status se_refine_peak_at(const double *r, size_t n, size_t k, size_t window_half, size_t *kpeak,
                            double *tau, double *amp, se_error *err);

/* The locator's last stage, shared by the whole-record pipeline (locate.c) and any streaming
 * one: from detected peaks of the matched-filter output to classified events with distances,
 * uncertainties, multiples and matches, and every result field that describes the record.
 * Lags are indices into the correlation r[k] = sum x[k+j] s[j] / E_s of the response. */
struct se_locate_config;
struct se_distmap;
struct se_locate_result;
struct se_peak;
typedef struct se_locate_stage {
    const struct se_locate_config *cfg;
    const struct se_distmap *map; /* delay -> distance (never NULL here) */
    double rate_hz;
    double lag0;                  /* refined lag of the direct arrival */
    double a0;                    /* its correlation amplitude */
    size_t k0;                    /* its integer lag */
    size_t m;                     /* reference length, samples */
    size_t dead;                  /* dead zone, lags after k0 */
    size_t end;                   /* one past the last lag searched */
    double sigma;                 /* noise of r (r units), floored */
    double kthr;                  /* threshold in sigmas */
    double thr;                   /* threshold (r units) */
    double beta_crb;              /* RMS bandwidth of the reference, rad/sample */
    double mainlobe_half_width;   /* of the reference autocorrelation, samples */
    /* Non-stationary noise (detect.h se_noise_profile, borrowed): NULL when the noise is
     * stationary; else each event's SNR and amplitude uncertainty use the level at its lag, and
     * the result reports noise_varies with the profile's extremes. */
    const struct se_noise_profile *profile;
    /* Repeated shots stacked (NULL otherwise): prev_weight[k], k = 1 .. n_prev_weight - 1, is
     * the weight of the echoes of the tap k before in the stack, the share of the stacked shots
     * that have k taps before them (a first tap left out of the stack has none after it). */
    const double *prev_weight;
    size_t n_prev_weight;
} se_locate_stage;
se_status se_locate_events(const se_locate_stage *sg, const struct se_peak *peaks, size_t npeaks,
                           struct se_locate_result *res, se_error *err);

/* A response read by range: read(ctx, pos, count, out, err) fills out [size: count] with samples
 * [pos, pos + count) of the response, in the locator's units (velocity), pos + count <= n. */
typedef struct se_sample_reader {
    se_status (*read)(void *ctx, size_t pos, size_t count, double *out, se_error *err);
    void *ctx;
    size_t n; /* samples in the response */
} se_sample_reader;

/* What follows CLEAN, shared by se_locate and se_locate_stream's single-shot path so their
 * answers agree: the least-squares refit of overlapping echoes on the response x (cfg->
 * fit_overlaps, not with skin), the cap of max_events, the source-end estimate when rs_unknown
 * (cfg->source_reflection then 0 on entry, the estimate on return), se_locate_events with *sg
 * (sg->cfg is set here to cfg; sg->profile NULL for stationary noise), the fitted and the
 * skin-corrected events' own uncertainties (skin_sd, plain_lag: NULL without skin), the losses,
 * and the dead-zone scan (SE_REF_CHANNEL, measured noise). direct: the direct arrival in x's lags;
 * ref [size: sg->m]: the reference; *peaks [size: *npeaks, lag order, malloc'd] may be replaced
 * (the caller frees it). res->noise_floored and the clipped runs must already be set. */
se_status se_locate_finish(se_locate_stage *sg, struct se_locate_config *cfg, int rs_unknown,
                           const se_sample_reader *x, const double *ref,
                           const struct se_peak *direct, int skin, const double *skin_sd,
                           const double *plain_lag, struct se_peak **peaks, size_t *npeaks,
                           struct se_locate_result *res, se_error *err);

#endif /* SE_INTERNAL_H */
