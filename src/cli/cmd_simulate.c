/* strandecho CLI: `strandecho simulate`, a thin layer over the forward models. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/distmap.h"
#include "strandecho/fdline.h"
#include "strandecho/fdmodel.h"
#include "strandecho/line.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/simulate.h"
#include "strandecho/units.h"

#define SE_MAX_REFLECTORS 256
/* Impedance given to a line known only by its speed (--speed: mu = 1 kg/m, so Z = v N s/m) or by
 * its velocity factor (50 ohm) when --impedance is not given: only impedance ratios shape a record. */
#define SE_FD_DEFAULT_OHM 50.0

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
    "  --skin-loss K            skin-effect loss of a cable, K in s^0.5/m ('4e-7') or from a\n"
    "                           datasheet ('6.6 dB/100m@100MHz', '2 dB/100 ft at 10 MHz'; all\n"
    "                           of it taken as skin loss: quote the lowest frequency near the\n"
    "                           pulse's band); default 0, or the --line file's skin_loss (mean\n"
    "                           K, exact at the far end). Each arrival is shaped by H(s) =\n"
    "                           exp(-K l sqrt(s)), l = speed x arrival time (with --line the\n"
    "                           first segment's speed); lattice model\n"
    "  --noise RMS              Gaussian noise, RMS relative to the pulse peak (default 0)\n"
    "  --seed N                 noise seed (default 1)\n"
    "  --pulse-start T          injection time (default twice the pulse length)\n"
    "  --line FILE              model a described line instead (docs/line-file.md): segments,\n"
    "                           junctions, features with coefficients, hanging segments and both\n"
    "                           ends; --reflector adds faults to it, --break D cuts it at D with a\n"
    "                           free-like end\n"
    "  --gain G                 scale of both channels (default 0.5)\n"
    "  --shots N                repeat the injection N times (taps), lattice model (default 1)\n"
    "  --interval T             time between shots (default the record length / N)\n"
    "  --model lattice|fd       forward model: the equal-travel-time lattice (default, fast) or\n"
    "                           the finite-difference wave-equation solver (docs/fd-model.md)\n"
    "  --quiet                  print nothing on success\n"
    "\n"
    "With --model fd the line is built from its physics: the speed options give T and mu (or EA\n"
    "and mu); --speed alone takes mu = 1 kg/m (Z = v N s/m) and --velocity-factor Z0 = 50 ohm\n"
    "unless --impedance says otherwise (only impedance ratios shape the record). A --reflector\n"
    "is an impedance step with that coefficient; the far end and source end follow the sign\n"
    "rule of --quantity (the source end must be free-like or continuing/matched). Channel 1 is\n"
    "the recorded quantity divided by the peak of the direct wave, channel 2 the force pulse.\n"
    "  --step D:RATIO           impedance step Z2/Z1 = RATIO from D on (repeatable)\n"
    "  --mass D:KG              a point mass (clamp, fitting) at D (repeatable)\n"
    "  --spring D:N/m           a spring to ground at D (repeatable)\n"
    "  --impedance Z            impedance of a line given by --speed or --velocity-factor\n"
    "  --cells-per-pulse N      finest grid the pulse needs (default 15)\n";

/* Options that only the fd model reads. */
typedef struct se_fd_opts {
    const char *step[SE_MAX_REFLECTORS];
    size_t nstep;
    const char *mass[SE_MAX_REFLECTORS];
    size_t nmass;
    const char *spring[SE_MAX_REFLECTORS];
    size_t nspring;
    const char *impedance;
    unsigned long cells;
} se_fd_opts;

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

/* "D:VALUE" for --step, --mass, --spring: a distance and a positive (or >= 0) value. */
static int se_parse_fd_at(const char *opt, const char *text, se_unit_kind kind, const char *unit,
                          double *d, double *value)
{
    char buf[128];
    const char *colon = strchr(text, ':');
    size_t n;
    se_error err;
    se_error_clear(&err);
    if (colon == NULL || colon == text)
        return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not DISTANCE:VALUE (e.g. 25m:%s)", opt, text,
                           unit);
    n = (size_t)(colon - text);
    if (n >= sizeof buf)
        return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is too long", opt, text);
    memcpy(buf, text, n);
    buf[n] = '\0';
    if (se_unit_parse(buf, SE_UNIT_LENGTH, "m", d, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "%s: %s", opt, err.message);
    if (!(*d >= 0.0))
        return se_cli_fail(SE_EXIT_USAGE, "%s: distance %g m is negative", opt, *d);
    if (strcmp(unit, "kg") == 0) {
        /* no mass unit in units.h: a number, optionally followed by kg */
        char *end;
        *value = strtod(colon + 1, &end);
        while (*end == ' ')
            end++;
        if (end == colon + 1 || (*end != '\0' && strcmp(end, "kg") != 0))
            return se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not a mass in kg", opt, colon + 1);
    } else if (se_unit_parse(colon + 1, kind, kind == SE_UNIT_RATIO ? NULL : unit, value, &err) !=
               SE_OK) {
        return se_cli_fail(SE_EXIT_USAGE, "%s: %s", opt, err.message);
    }
    if (!(*value >= 0.0 && isfinite(*value)))
        return se_cli_fail(SE_EXIT_USAGE, "%s: value %g %s must be >= 0 and finite", opt, *value,
                           unit);
    return SE_EXIT_OK;
}

/* The fd model: build the line from its physics, run it, normalise, write, report. */
static int se_run_fd(const se_cli *c, const se_fd_opts *fo, const se_speed *sp, se_quantity q,
                     const se_line *ln, const char *line_path, const se_sim_reflector *refl,
                     size_t nrefl, const char *break_spec, const char *end_spec, double rs,
                     const se_sim_record *rec, double loss, double gain, const char *out)
{
    se_error err;
    se_fd_line *m = NULL;
    se_fd_config cfg;
    se_fd_stats st;
    double *resp = NULL, *inj = NULL, peak = 0.0, end_d = 0.0, end_r = 0.0, z1 = NAN, v1 = NAN;
    size_t frames, i;
    int rc = SE_EXIT_OK;
    const char *zsrc = "";
    double sd[SE_MAX_REFLECTORS], sr[SE_MAX_REFLECTORS];
    se_fd_point pts[2 * SE_MAX_REFLECTORS];

    se_error_clear(&err);
    memset(&cfg, 0, sizeof cfg);
    memset(pts, 0, sizeof pts);
    for (i = 0; i < fo->nstep; i++)
        if (se_parse_fd_at("--step", fo->step[i], SE_UNIT_RATIO, "Z2/Z1", &sd[i], &sr[i]) != 0)
            return SE_EXIT_USAGE;
    for (i = 0; i < fo->nmass + fo->nspring; i++) {
        int is_mass = i < fo->nmass;
        double val;
        if (se_parse_fd_at(is_mass ? "--mass" : "--spring",
                           is_mass ? fo->mass[i] : fo->spring[i - fo->nmass],
                           SE_UNIT_WEIGHT_PER_LENGTH, is_mass ? "kg" : "N/m", &pts[i].x_m,
                           &val) != 0)
            return SE_EXIT_USAGE;
        if (is_mass)
            pts[i].mass_kg = val;
        else
            pts[i].spring_n_m = val;
    }
    if (ln != NULL) {
        m = se_fd_line_from_line(ln, fmax(0.25 / rec->rate_hz, rec->pulse.duration_s / 16.0), &err);
        if (m == NULL)
            return se_cli_fail_err(&err, 0);
        zsrc = ln->segments[0].impedance_near > 0.0 ? "from the line file"
                                                    : "1 (the line file gives none)";
    } else {
        if (!isnan(sp->tension_n) || !isnan(sp->axial_stiffness_n)) {
            if (fo->impedance != NULL)
                return se_cli_fail(SE_EXIT_USAGE,
                                   "--impedance: the tension (or EA) and mass per length already "
                                   "give Z = sqrt(T mu)");
            z1 = sp->mass_per_length_kg_m * sp->speed_m_s;
            zsrc = "sqrt(T mu)";
        } else if (fo->impedance != NULL) {
            if (se_unit_parse(fo->impedance, SE_UNIT_IMPEDANCE, NULL, &z1, &err) != SE_OK)
                return se_cli_fail(SE_EXIT_USAGE, "--impedance: %s", err.message);
            if (!(z1 > 0.0 && isfinite(z1)))
                return se_cli_fail(SE_EXIT_USAGE, "--impedance: %g is not positive", z1);
            zsrc = "given (--impedance)";
        } else if (sp->electrical_hint) {
            z1 = SE_FD_DEFAULT_OHM;
            zsrc = "50 ohm assumed (only ratios matter)";
        } else {
            z1 = sp->speed_m_s; /* mu = 1 kg/m */
            zsrc = "mu = 1 kg/m assumed, Z = v (only ratios matter)";
        }
        if (end_spec != NULL) {
            if (se_parse_at("--end", end_spec, q, &end_d, &end_r) != 0)
                return SE_EXIT_USAGE;
        } else {
            /* no far end inside the record: an absorbing end beyond the farthest echo or element */
            end_d = 0.5 * sp->speed_m_s * rec->duration_s * 1.01;
            for (i = 0; i < nrefl; i++)
                end_d = fmax(end_d, refl[i].distance_m * 1.01);
            for (i = 0; i < fo->nstep; i++)
                end_d = fmax(end_d, 1.01 * sd[i]);
            for (i = 0; i < fo->nmass + fo->nspring; i++)
                end_d = fmax(end_d, 1.01 * pts[i].x_m);
            end_r = 0.0;
        }
        m = se_fd_line_uniform(sp->speed_m_s, z1, end_d, q, rs, end_r, &err);
        if (m == NULL)
            return se_cli_fail(se_cli_exit_code(err.code, 0), "simulate --model fd: %s",
                               err.message);
    }
    for (i = 0; i < nrefl; i++)
        if (se_fd_line_add_reflector(m, refl[i].distance_m, refl[i].reflection, &err) != SE_OK) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--reflector: %s", err.message);
            goto done;
        }
    for (i = 0; i < fo->nstep; i++)
        if (se_fd_line_add_step(m, sd[i], sr[i], &err) != SE_OK) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--step: %s", err.message);
            goto done;
        }
    for (i = 0; i < fo->nmass + fo->nspring; i++)
        if (se_fd_line_add_point(m, &pts[i], &err) != SE_OK) {
            rc = se_cli_fail(SE_EXIT_USAGE, "%s: %s", i < fo->nmass ? "--mass" : "--spring",
                             err.message);
            goto done;
        }
    if (break_spec != NULL) {
        double bd;
        if (se_unit_parse(break_spec, SE_UNIT_LENGTH, "m", &bd, &err) != SE_OK ||
            se_fd_line_cut(m, bd, &err) != SE_OK) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--break: %s", err.message);
            goto done;
        }
    }
    se_fd_line_config(m, &cfg);
    cfg.pulse = rec->pulse;
    cfg.pulse_amplitude_n = 1.0;
    cfg.pulse_start_s = rec->pulse_start_s;
    cfg.rate_hz = rec->rate_hz;
    cfg.duration_s = rec->duration_s;
    cfg.min_cells_per_pulse = (size_t)fo->cells;
    if (se_fd_line_at(m, 0.0, &z1, &v1, &err) != SE_OK) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }
    cfg.loss_np_per_s = loss * log(10.0) / 20.0 * v1;
    if (se_fd_plan(&cfg, &st, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "simulate --model fd: %s", err.message);
        goto done;
    }
    frames = se_fd_frames(&cfg);
    if (frames < 2 || !(rec->duration_s * rec->rate_hz <= (double)SE_SIM_MAX_FRAMES)) {
        rc = se_cli_fail(SE_EXIT_USAGE, "simulate: %g s at %g Hz gives %zu samples (2 to %zu)",
                         rec->duration_s, rec->rate_hz, frames, (size_t)SE_SIM_MAX_FRAMES);
        goto done;
    }
    {
        const char *inputs[2] = {line_path, NULL};
        if ((rc = se_cli_check_output(out, inputs)) != SE_EXIT_OK)
            goto done;
    }
    resp = malloc(frames * sizeof *resp);
    inj = malloc(frames * sizeof *inj);
    if (resp == NULL || inj == NULL) {
        rc = se_cli_fail(SE_EXIT_MEMORY, "simulate: out of memory for %zu samples", frames);
        goto done;
    }
    if (se_fd_simulate(&cfg, resp, inj, frames, &st, &err) != SE_OK ||
        se_fd_direct_peak(&cfg, &peak, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "simulate --model fd: %s", err.message);
        goto done;
    }
    for (i = 0; i < frames; i++)
        resp[i] /= peak;
    if (se_fd_add_noise(resp, frames, rec->noise_rms, rec->seed, &err) != SE_OK) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }
    for (i = 0; i < frames; i++) {
        resp[i] *= gain;
        inj[i] *= gain;
    }
    {
        const double *chans[2] = {resp, inj};
        if (se_recording_write(out, chans, 2, frames, rec->rate_hz, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 1);
            goto done;
        }
    }
    if (!c->quiet) {
        double x = 0.0, tau;
        int sign = se_quantity_sign(q);
        printf("wrote %s: %zu samples at %.10g Hz, fd model: %zu cells, dt %.6g s (%.0f steps per "
               "sample), energy balance %.2g\n",
               out, frames, rec->rate_hz, st.cells, st.dt_s, 1.0 / (st.dt_s * rec->rate_hz),
               st.energy_drift);
        printf("  speed %.6g m/s (%s), impedance %.6g (%s), %s source, %s recorded, %s far end\n", v1,
               ln != NULL ? "line file" : sp->source, z1, zsrc,
               cfg.source == SE_FD_SOURCE_FREE ? "free" : "matched", se_quantity_name(q),
               cfg.far_end == SE_FD_END_FIXED  ? "fixed"
               : cfg.far_end == SE_FD_END_FREE ? "free"
                                               : "absorbing");
        printf("  channel 1 = %s / %.6g (direct-wave peak, SI units per N of force)\n",
               se_quantity_name(q), peak);
        for (i = 0; i + 1 < m->n_segments; i++) {
            const se_fd_segment *a = &m->segments[i], *b = &m->segments[i + 1];
            double za = sqrt(a->tension_n * a->mu_kg_m), zb = sqrt(b->tension_n * b->mu_kg_m);
            double r = sign * (za - zb) / (za + zb);
            x += a->length_m;
            if (fabs(r) <= 1e-3 && ln != NULL)
                continue;
            if (se_fd_grid_delay(&cfg, x, &tau, &err) != SE_OK) {
                rc = se_cli_fail_err(&err, 0);
                goto done;
            }
            printf("  step at %.4f m: grid round trip %.9f s", x, 2.0 * tau);
            if (ln == NULL)
                printf(" (v tau = %.4f m)", tau * v1);
            printf(", Z2/Z1 %.6g, coefficient %+.4f%s\n", zb / za, r,
                   m->has_tail && i + 2 == m->n_segments ? " (far end)" : "");
        }
        for (i = 0; i < m->n_points; i++) {
            if (se_fd_grid_delay(&cfg, m->points[i].x_m, &tau, &err) != SE_OK) {
                rc = se_cli_fail_err(&err, 0);
                goto done;
            }
            printf("  point at %.4f m: grid round trip %.9f s, mass %g kg, spring %g N/m\n",
                   m->points[i].x_m, 2.0 * tau, m->points[i].mass_kg, m->points[i].spring_n_m);
        }
        if (se_fd_grid_delay(&cfg, m->end_m, &tau, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
        printf("  far end at %.4f m: grid round trip %.9f s", m->end_m, 2.0 * tau);
        if (ln == NULL)
            printf(" (v tau = %.4f m)", tau * v1);
        printf("\n");
    }
done:
    se_fd_line_free(m);
    free(resp);
    free(inj);
    return rc;
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
    double loss = 0.0, noise = 0.0, gain = 0.5, seed = 1.0, shots = 1.0, interval_s = 0.0;
    double skin = 0.0;
    const char *skin_text = NULL;
    const char *interval = NULL;
    se_sim_reflector refl[SE_MAX_REFLECTORS];
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_quantity q;
    double end_d = 0.0, end_r = 0.0, rs = 0.0;
    double *resp = NULL, *inj = NULL;
    int rc = SE_EXIT_OK, got, fd = 0;
    se_fd_opts fo;

    memset(&fo, 0, sizeof fo);
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
        if ((got = se_cli_value(&c, "--model", &v)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            if (strcmp(v, "fd") == 0)
                fd = 1;
            else if (strcmp(v, "lattice") == 0)
                fd = 0;
            else
                return se_cli_fail(SE_EXIT_USAGE, "--model: '%s' is not lattice or fd", v);
            continue;
        }
#define SE_TAKE_MANY(name, arr, count)                                                            \
    if ((got = se_cli_value(&c, name, &v)) != 0) {                                                \
        if (got < 0)                                                                              \
            return SE_EXIT_USAGE;                                                                 \
        if ((count) >= SE_MAX_REFLECTORS)                                                         \
            return se_cli_fail(SE_EXIT_USAGE, "%s: at most %d", name, SE_MAX_REFLECTORS);         \
        (arr)[(count)++] = v;                                                                     \
        continue;                                                                                 \
    }
        SE_TAKE_MANY("--step", fo.step, fo.nstep)
        SE_TAKE_MANY("--mass", fo.mass, fo.nmass)
        SE_TAKE_MANY("--spring", fo.spring, fo.nspring)
#undef SE_TAKE_MANY
        SE_TAKE("--impedance", fo.impedance)
        if ((got = se_cli_value(&c, "--cells-per-pulse", &v)) != 0) {
            if (got < 0 || se_cli_uint("--cells-per-pulse", v, 2, 100000, &fo.cells) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--loss", &v)) != 0) {
            if (got < 0 || se_parse_number("--loss", v, 0.0, 100.0, &loss) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--skin-loss", &v)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            skin_text = v;
            continue;
        }
        if ((got = se_cli_value(&c, "--noise", &v)) != 0) {
            if (got < 0 || se_parse_number("--noise", v, 0.0, 1e3, &noise) != 0)
                return SE_EXIT_USAGE;
            continue;
        }
        if ((got = se_cli_value(&c, "--shots", &v)) != 0) {
            if (got < 0 || se_parse_number("--shots", v, 1.0, 1000.0, &shots) != 0 ||
                shots != floor(shots))
                return se_cli_fail(SE_EXIT_USAGE, "--shots: '%s' is not a whole number from 1 to 1000",
                                   v);
            continue;
        }
        if ((got = se_cli_value(&c, "--interval", &v)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            interval = v;
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
    if (!fd && (fo.nstep || fo.nmass || fo.nspring || fo.impedance || fo.cells))
        return se_cli_fail(SE_EXIT_USAGE, "--step, --mass, --spring, --impedance and "
                                          "--cells-per-pulse go with --model fd");
    if (break_spec != NULL && line_path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "--break goes with --line (use --end D:free otherwise)");
    if ((rc = se_cli_speed_resolve(&so, line_path == NULL, &sp)) != SE_EXIT_OK)
        return rc;
    q = sp.electrical_hint ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL && se_quantity_parse(quantity, &q, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
    if (skin_text != NULL && se_skin_loss_parse(skin_text, &skin, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--skin-loss: %s", err.message);
    if (line_path != NULL) {
        ln = se_line_read(line_path, &err);
        if (ln == NULL)
            return se_cli_fail_err(&err, 0);
        q = ln->quantity;
        if (skin_text == NULL) {
            /* one K for the line (line.h): a = K v t with the first segment's speed v, so scale
             * the mean K by mean speed / v to give the far end's echo a = 2 sum K_i l_i */
            double kmean = 0.0;
            if (se_line_skin_loss(ln, &kmean, &err) != SE_OK) {
                se_line_free(ln);
                return se_cli_fail_err(&err, 0);
            }
            if (kmean > 0.0)
                skin = kmean * (ln->length_m / (0.5 * ln->round_trip_s)) / ln->segments[0].speed_near_m_s;
        }
    }
    if (se_pulse_parse(pulse, &rec.pulse, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--pulse: %s", err.message);
        goto done;
    }
    if (se_unit_parse(rate, SE_UNIT_FREQUENCY, "Hz", &rec.rate_hz, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--rate: %s", err.message);
        goto done;
    }
    if (se_unit_parse(duration, SE_UNIT_TIME, "s", &rec.duration_s, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--duration: %s", err.message);
        goto done;
    }
    rec.pulse_start_s = 2.0 * rec.pulse.duration_s;
    if (pulse_start != NULL &&
        se_unit_parse(pulse_start, SE_UNIT_TIME, "s", &rec.pulse_start_s, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--pulse-start: %s", err.message);
        goto done;
    }
    if (source_end != NULL && se_termination_parse(source_end, q, &rs, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--source-end: %s", err.message);
        goto done;
    }
    for (i = 0; i < nrefl; i++)
        if (se_parse_at("--reflector", refl_spec[i], q, &refl[i].distance_m, &refl[i].reflection) != 0) {
            rc = SE_EXIT_USAGE;
            goto done;
        }
    if (fd && shots > 1.0) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--shots goes with the lattice model (drop --model fd)");
        goto done;
    }
    if (fd && skin > 0.0) {
        rc = se_cli_fail(SE_EXIT_USAGE, "%s goes with the lattice model (drop --model fd%s)",
                         skin_text != NULL ? "--skin-loss" : "the line file's skin_loss",
                         skin_text != NULL ? "" : ", or give --skin-loss 0");
        goto done;
    }
    if (fd) {
        rec.noise_rms = noise;
        rec.seed = (unsigned long)seed;
        rc = se_run_fd(&c, &fo, &sp, q, ln, line_path, refl, nrefl, break_spec, end_spec, rs, &rec,
                       loss, gain, out);
        goto done;
    }
    if (ln != NULL) {
        rc = se_line_model(ln, refl, nrefl, break_spec, &rec, &ifs, &line);
        if (rc != SE_EXIT_OK)
            goto done;
        /* many small gradient steps: scattering below 1e-6 of the pulse is not simulated */
        rec.amplitude_floor = 1e-6;
        sp.speed_m_s = ln->segments[0].speed_near_m_s;
        snprintf(sp.source, sizeof sp.source, "line file %s", line_path);
    } else if (end_spec != NULL) {
        if (se_parse_at("--end", end_spec, q, &end_d, &end_r) != 0) {
            rc = SE_EXIT_USAGE;
            goto done;
        }
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
            goto done;
    }
    rec.noise_rms = shots > 1.0 ? 0.0 : noise; /* repeated shots: noise added once, afterwards */
    rec.seed = (unsigned long)seed;
    if (interval != NULL &&
        se_unit_parse(interval, SE_UNIT_TIME, "s", &interval_s, &err) != SE_OK) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--interval: %s", err.message);
        goto done;
    }
    if (shots > 1.0 && interval == NULL)
        interval_s = rec.duration_s / shots;
    if (shots > 1.0 &&
        !(interval_s > rec.pulse.duration_s && interval_s * (shots - 1.0) < rec.duration_s)) {
        rc = se_cli_fail(SE_EXIT_USAGE,
                         "--interval: %g s between %g shots does not fit a %g s record (or is "
                         "shorter than the pulse)",
                         interval_s, shots, rec.duration_s);
        goto done;
    }
    if (ln != NULL) {
        if (loss > 0.0)
            line.loss_np_per_s = loss * log(10.0) / 20.0 * sp.speed_m_s;
    } else if (se_sim_uniform_line(sp.speed_m_s, refl, nrefl, end_d, end_r, rs, loss, &ifs, &line,
                                   &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "simulate: %s", err.message);
        goto done;
    }
    if (!(rec.duration_s * rec.rate_hz <= (double)((size_t)1 << 31))) {
        rc = se_cli_fail(SE_EXIT_MEMORY,
                         "simulate: %g s at %g Hz is %g samples, more than the limit of %zu",
                         rec.duration_s, rec.rate_hz, rec.duration_s * rec.rate_hz,
                         (size_t)1 << 31);
        goto done;
    }
    if (rec.rate_hz > 1e9) {
        rc = se_cli_fail(SE_EXIT_USAGE, "simulate: --rate %g Hz is above the simulator's limit of "
                                        "1 GHz",
                         rec.rate_hz);
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
    if (se_simulate_skin(&line, &rec, skin, sp.speed_m_s, resp, inj, frames, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "simulate: %s", err.message);
        goto done;
    }
    if (shots > 1.0) {
        /* superpose the shots (the line is linear): backwards, so each sum reads unmodified
         * earlier samples */
        size_t step = (size_t)llround(interval_s * rec.rate_hz), k, ns = (size_t)shots;
        for (i = frames; i-- > 0;)
            for (k = 1; k < ns; k++)
                if (i >= k * step) {
                    resp[i] += resp[i - k * step];
                    inj[i] += inj[i - k * step];
                }
        if (se_fd_add_noise(resp, frames, noise, rec.seed, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
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
