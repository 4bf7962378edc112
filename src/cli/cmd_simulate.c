/* strandecho CLI: `strandecho simulate`, a thin layer over the forward models. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/distmap.h"
#include "strandecho/line.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/simulate.h"
#include "strandecho/units.h"

#define SE_MAX_REFLECTORS 256

static const char se_simulate_usage[] =
    "usage: strandecho simulate --pulse SPEC --rate HZ --duration SECONDS -o FILE [options]\n"
    "\n"
    "Make a two-channel recording (1: the response at the sensor, 2: the injected pulse) of a\n"
    "uniform line with point reflectors, a far end and a source end, every multiple included\n"
    "(equal-travel-time lattice).\n"
    "\n"
    "  --pulse SPEC             hann:20ms halfsine:2ms gauss:3ms triangle:2ms ricker:200Hz\n"
    "                           burst:5@2kHz chirp:100Hz-2kHz:50ms\n"
    "  --rate HZ                sample rate (Hz, kHz, MHz)\n"
    "  --duration SECONDS       record length (s, ms, us)\n"
    "  -o, --output FILE        .wav .flac .aiff .w64 .rf64 .caf or .csv\n"
    "  wave speed: --speed, --velocity-factor, --tension/--axial-stiffness with --mass-per-length\n"
    "  --reflector D:R          a reflector at distance D (m, ft...) with coefficient R as the\n"
    "                           sensor sees it, or a name: fixed free open short (repeatable)\n"
    "  --end D:TERM             the far end at D: fixed, free, open, short, matched or R\n"
    "                           (default: none within the record)\n"
    "  --source-end TERM        continuing (default), free, fixed, open, short, matched or R\n"
    "  --quantity Q             what the sensor records (sign rule for named terminations;\n"
    "                           default velocity, voltage with --velocity-factor)\n"
    "  --loss DB_PER_M          attenuation, dB per metre of travel (default 0)\n"
    "  --noise RMS              Gaussian noise, RMS relative to the pulse peak (default 0)\n"
    "  --seed N                 noise seed (default 1)\n"
    "  --pulse-start T          injection time (default twice the pulse length)\n"
    "  --line FILE              model a described line instead (docs/line-file.md): segments,\n"
    "                           junctions, features with coefficients, hanging segments and both\n"
    "                           ends; --reflector adds faults to it, --break D cuts it at D with a\n"
    "                           free-like end\n"
    "  --gain G                 scale of both channels (default 0.5)\n"
    "  --quiet                  print nothing on success\n";

/* "D:R" with a length unit and a coefficient or termination name. */
static int se_parse_at(const char *opt, const char *text, se_quantity q, double *d, double *r)
{
    char buf[128];
    const char *colon = strrchr(text, ':');
    size_t n;
    se_error err;
    se_error_clear(&err);
    if (colon == NULL || colon == text)
        return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not DISTANCE:COEFFICIENT (e.g. 25m:-0.3)",
                           opt, text);
    n = (size_t)(colon - text);
    if (n >= sizeof buf)
        return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is too long", opt, text);
    memcpy(buf, text, n);
    buf[n] = '\0';
    if (se_unit_parse(buf, SE_UNIT_LENGTH, "m", d, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "%s: %s", opt, err.message);
    if (!(*d > 0.0))
        return se_cli_fail(SE_EXIT_USAGE, "%s: distance %g m is not positive", opt, *d);
    if (se_termination_parse(colon + 1, q, r, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "%s: %s", opt, err.message);
    return SE_EXIT_OK;
}

static int se_parse_number(const char *opt, const char *text, double lo, double hi, double *out)
{
    char *end;
    double v = strtod(text, &end);
    while (*end == ' ')
        end++;
    if (end == text || (*end != '\0' && strcmp(end, "dB/m") != 0) || !isfinite(v) || v < lo || v > hi)
        return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not a number in [%g, %g]", opt, text, lo, hi);
    *out = v;
    return SE_EXIT_OK;
}

static int se_iface_cmp(const void *a, const void *b)
{
    const se_sim_interface *x = a, *y = b;
    return (x->one_way_s > y->one_way_s) - (x->one_way_s < y->one_way_s);
}

/* The described line as lattice interfaces, with extra reflectors (faults) and an optional break. */
static int se_line_model(const se_line *ln, const se_sim_reflector *refl, size_t nrefl,
                         const char *break_spec, const se_sim_record *rec, se_sim_interface **ifs,
                         se_sim_line *line)
{
    se_error err;
    se_line_interface *li = NULL;
    size_t nli = 0, i, n = 0;
    double break_d = INFINITY, break_rt = INFINITY, r_free;
    const se_distmap *map = se_line_distmap(ln);
    se_error_clear(&err);
    if (break_spec != NULL) {
        if (se_unit_parse(break_spec, SE_UNIT_LENGTH, "m", &break_d, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--break: %s", err.message);
        if (!(break_d > 0.0 && break_d < ln->length_m))
            return se_cli_fail(SE_EXIT_USAGE, "--break: %g m is not inside the line (0, %g m)",
                               break_d, ln->length_m);
        if (se_distmap_time(map, break_d, &break_rt, &err) != SE_OK)
            return se_cli_fail_err(&err, 0);
    }
    /* Hanging segments are cut into impedance steps no longer than a sixteenth of the pulse (and
     * a quarter sample): finer steps add arrivals, not accuracy, at the pulse's bandwidth. */
    if (se_line_interfaces(ln, fmax(0.25 / rec->rate_hz, rec->pulse.duration_s / 16.0), &li, &nli,
                           &err) != SE_OK)
        return se_cli_fail_err(&err, 0);
    *ifs = malloc((nli + nrefl + 1) * sizeof **ifs);
    if (*ifs == NULL) {
        free(li);
        return se_cli_fail(SE_EXIT_MEMORY, "simulate: out of memory for the line model");
    }
    for (i = 0; i < nli; i++) {
        if (2.0 * li[i].one_way_s >= break_rt)
            break;
        if (li[i].reflection == 0.0 && i + 1 < nli)
            continue;
        (*ifs)[n].one_way_s = li[i].one_way_s;
        (*ifs)[n].reflection = li[i].reflection;
        n++;
    }
    free(li);
    for (i = 0; i < nrefl; i++) {
        double rt;
        if (!(refl[i].distance_m < fmin(ln->length_m, break_d)))
            return se_cli_fail(SE_EXIT_USAGE, "--reflector at %g m is not on the line (length %g m)",
                               refl[i].distance_m, fmin(ln->length_m, break_d));
        if (se_distmap_time(map, refl[i].distance_m, &rt, &err) != SE_OK)
            return se_cli_fail_err(&err, 0);
        (*ifs)[n].one_way_s = 0.5 * rt;
        (*ifs)[n].reflection = refl[i].reflection;
        n++;
    }
    if (break_spec != NULL) {
        if (se_termination_parse("free", ln->quantity, &r_free, &err) != SE_OK)
            return se_cli_fail_err(&err, 0);
        (*ifs)[n].one_way_s = 0.5 * break_rt;
        (*ifs)[n].reflection = r_free;
        n++;
    }
    qsort(*ifs, n, sizeof **ifs, se_iface_cmp);
    line->interfaces = *ifs;
    line->n_interfaces = n;
    line->source_reflection = ln->source_end_r;
    line->loss_np_per_s = 0.0;
    return SE_EXIT_OK;
}

int se_cmd_simulate(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_speed_opts so;
    se_speed sp;
    se_error err;
    const char *pulse = NULL, *rate = NULL, *duration = NULL, *out = NULL, *v;
    const char *quantity = NULL, *source_end = NULL, *end_spec = NULL, *pulse_start = NULL;
    const char *line_path = NULL, *break_spec = NULL;
    se_line *ln = NULL;
    const char *refl_spec[SE_MAX_REFLECTORS];
    size_t nrefl = 0, frames, i;
    double loss = 0.0, noise = 0.0, gain = 0.5, seed = 1.0;
    se_sim_reflector refl[SE_MAX_REFLECTORS];
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_quantity q;
    double end_d = 0.0, end_r = 0.0, rs = 0.0;
    double *resp = NULL, *inj = NULL;
    int rc = SE_EXIT_OK, got;

    memset(&so, 0, sizeof so);
    memset(&rec, 0, sizeof rec);
    se_error_clear(&err);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_simulate_usage, stdout);
            return SE_EXIT_OK;
        }
        if ((got = se_cli_speed_option(&c, &so)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            continue;
        }
#define SE_TAKE(name, var)                                                                        \
    if ((got = se_cli_value(&c, name, &(var))) != 0) {                                            \
        if (got < 0)                                                                              \
            return SE_EXIT_USAGE;                                                                 \
        continue;                                                                                 \
    }
        SE_TAKE("--pulse", pulse)
        SE_TAKE("--rate", rate)
        SE_TAKE("--duration", duration)
        SE_TAKE("--output", out)
        SE_TAKE("-o", out)
        SE_TAKE("--quantity", quantity)
        SE_TAKE("--source-end", source_end)
        SE_TAKE("--end", end_spec)
        SE_TAKE("--pulse-start", pulse_start)
        SE_TAKE("--line", line_path)
        SE_TAKE("--break", break_spec)
        if ((got = se_cli_value(&c, "--reflector", &v)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            if (nrefl >= SE_MAX_REFLECTORS)
                return se_cli_fail(SE_EXIT_USAGE, "--reflector: at most %d reflectors",
                                   SE_MAX_REFLECTORS);
            refl_spec[nrefl++] = v;
            continue;
        }
        if ((got = se_cli_value(&c, "--loss", &v)) != 0) {
            if (got < 0 || se_parse_number("--loss", v, 0.0, 100.0, &loss) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--noise", &v)) != 0) {
            if (got < 0 || se_parse_number("--noise", v, 0.0, 1e3, &noise) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--gain", &v)) != 0) {
            if (got < 0 || se_parse_number("--gain", v, 1e-9, 1e9, &gain) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--seed", &v)) != 0) {
            if (got < 0 || se_parse_number("--seed", v, 0.0, 4294967295.0, &seed) != 0 ||
                seed != floor(seed))
                return se_cli_fail(SE_EXIT_USAGE, "--seed: '%s' is not a whole number", v);
            continue;
        }
#undef SE_TAKE
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        return se_cli_fail(SE_EXIT_USAGE, "simulate: unknown argument %s (see strandecho simulate --help)",
                           a);
    }
    if (pulse == NULL || rate == NULL || duration == NULL || out == NULL)
        return se_cli_fail(SE_EXIT_USAGE,
                           "simulate needs --pulse, --rate, --duration and -o (see --help)");
    if (line_path != NULL &&
        (so.speed || so.velocity_factor || so.tension || so.axial_stiffness || so.mass_per_length ||
         quantity || source_end || end_spec))
        return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the speeds, quantity and ends: drop "
                                          "--speed/--tension/--quantity/--source-end/--end",
                           line_path);
    if (break_spec != NULL && line_path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "--break goes with --line (use --end D:free otherwise)");
    if ((rc = se_cli_speed_resolve(&so, line_path == NULL, &sp)) != SE_EXIT_OK)
        return rc;
    q = sp.electrical_hint ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL && se_quantity_parse(quantity, &q, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
    if (line_path != NULL) {
        ln = se_line_read(line_path, &err);
        if (ln == NULL)
            return se_cli_fail_err(&err, 0);
        q = ln->quantity;
    }
    if (se_pulse_parse(pulse, &rec.pulse, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--pulse: %s", err.message);
    if (se_unit_parse(rate, SE_UNIT_FREQUENCY, "Hz", &rec.rate_hz, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--rate: %s", err.message);
    if (se_unit_parse(duration, SE_UNIT_TIME, "s", &rec.duration_s, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--duration: %s", err.message);
    rec.pulse_start_s = 2.0 * rec.pulse.duration_s;
    if (pulse_start != NULL &&
        se_unit_parse(pulse_start, SE_UNIT_TIME, "s", &rec.pulse_start_s, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--pulse-start: %s", err.message);
    if (source_end != NULL && se_termination_parse(source_end, q, &rs, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--source-end: %s", err.message);
    for (i = 0; i < nrefl; i++)
        if (se_parse_at("--reflector", refl_spec[i], q, &refl[i].distance_m, &refl[i].reflection) != 0)
            return SE_EXIT_USAGE;
    if (ln != NULL) {
        rc = se_line_model(ln, refl, nrefl, break_spec, &rec, &ifs, &line);
        if (rc != SE_EXIT_OK)
            goto done;
        /* many small gradient steps: scattering below 1e-6 of the pulse is not simulated */
        rec.amplitude_floor = 1e-6;
        sp.speed_m_s = ln->segments[0].speed_near_m_s;
        snprintf(sp.source, sizeof sp.source, "line file %s", line_path);
    } else if (end_spec != NULL) {
        if (se_parse_at("--end", end_spec, q, &end_d, &end_r) != 0)
            return SE_EXIT_USAGE;
    } else {
        /* no far end inside the record: a matched end just beyond everything */
        end_d = 0.5 * sp.speed_m_s * rec.duration_s * 1.01;
        for (i = 0; i < nrefl; i++)
            if (refl[i].distance_m >= end_d)
                end_d = refl[i].distance_m * 1.01;
        end_r = 0.0;
    }
    {
        const char *inputs[1] = {NULL};
        if ((rc = se_cli_check_output(out, inputs)) != SE_EXIT_OK)
            return rc;
    }
    rec.noise_rms = noise;
    rec.seed = (unsigned long)seed;
    if (ln != NULL) {
        if (loss > 0.0)
            line.loss_np_per_s = loss * log(10.0) / 20.0 * sp.speed_m_s;
    } else if (se_sim_uniform_line(sp.speed_m_s, refl, nrefl, end_d, end_r, rs, loss, &ifs, &line,
                                   &err) != SE_OK) {
        return se_cli_fail(se_cli_exit_code(err.code, 0), "simulate: %s", err.message);
    }
    if (!(rec.duration_s * rec.rate_hz <= (double)((size_t)1 << 31))) {
        rc = se_cli_fail(SE_EXIT_MEMORY,
                         "simulate: %g s at %g Hz is %g samples, more than the limit of %zu",
                         rec.duration_s, rec.rate_hz, rec.duration_s * rec.rate_hz,
                         (size_t)1 << 31);
        goto done;
    }
    frames = se_sim_frames(&rec);
    if (frames < 2) {
        rc = se_cli_fail(SE_EXIT_USAGE, "simulate: %g s at %g Hz gives fewer than 2 samples",
                         rec.duration_s, rec.rate_hz);
        goto done;
    }
    resp = malloc(frames * sizeof *resp);
    inj = malloc(frames * sizeof *inj);
    if (resp == NULL || inj == NULL) {
        rc = se_cli_fail(SE_EXIT_MEMORY, "simulate: out of memory for %zu samples", frames);
        goto done;
    }
    if (se_simulate(&line, &rec, resp, inj, frames, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "simulate: %s", err.message);
        goto done;
    }
    for (i = 0; i < frames; i++) {
        resp[i] *= gain;
        inj[i] *= gain;
    }
    {
        const double *chans[2] = {resp, inj};
        if (se_recording_write(out, chans, 2, frames, rec.rate_hz, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 1);
            goto done;
        }
    }
    if (!c.quiet) {
        printf("wrote %s: %zu samples at %.10g Hz, speed %.6g m/s (%s)\n", out, frames, rec.rate_hz,
               sp.speed_m_s, sp.source);
        for (i = 0; i < line.n_interfaces; i++)
            if (ln == NULL || nrefl + 8 > line.n_interfaces || i + 1 == line.n_interfaces ||
                fabs(line.interfaces[i].reflection) > 1e-3)
                printf("  interface %zu: round trip %.9f s, coefficient %+.4f%s\n", i + 1,
                       2.0 * line.interfaces[i].one_way_s, line.interfaces[i].reflection,
                       i + 1 == line.n_interfaces ? " (far end)" : "");
    }
done:
    se_line_free(ln);
    free(resp);
    free(inj);
    free(ifs);
    return rc;
}
