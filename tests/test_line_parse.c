/* Line file reader: every documented error gives its message with FILE:LINE:COLUMN (table-driven),
 * and the example files in fixtures/lines read with the values they state. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "strandecho/line.h"
#include "testutil.h"

#define HEAD "line: test\nwave: transverse\nquantity: velocity\n"
/* an electrical segment, its skin_loss on line 7 at column 16 */
#define E_SEG "wave: electrical\nquantity: voltage\nsegments:\n  - name: a\n    length: 5 m\n" \
              "    velocity_factor: 0.66\n"
#define SEG_A "segments:\n  - name: a\n    length: 100 m\n    mass_per_length: 10 kg/m\n"

typedef struct bad_case {
    const char *what;
    const char *text;
    se_status code;
    const char *where;   /* "t.yaml:LINE:COLUMN:" expected at the start of the message */
    const char *message; /* substring expected in the message */
} bad_case;

static const bad_case bad_cases[] = {
    {"YAML syntax", HEAD "segments: [a\n", SE_ERR_FORMAT, "t.yaml:5:1:", "YAML syntax"},
    {"second document", HEAD SEG_A "    tension: 1 kN\nend: fixed\n---\nline: other\n", SE_ERR_FORMAT,
     "t.yaml:11:1:", "a second YAML document: a line file describes one line"},
    {"syntax error in a second document", HEAD SEG_A "    tension: 1 kN\nend: fixed\n---\nline: [a\n",
     SE_ERR_FORMAT, "t.yaml:12:1:", "YAML syntax"},
    {"unknown segment key with suggestion", HEAD SEG_A "    tensoin: 10 kN\nend: fixed\n", SE_ERR_FORMAT,
     "t.yaml:8:5:", "unknown key 'tensoin' in a segment (did you mean 'tension'?)"},
    {"unknown top key with suggestion", HEAD "segmnets: []\nend: fixed\n", SE_ERR_FORMAT, "t.yaml:4:1:",
     "did you mean 'segments'?"},
    {"unknown key far from all", HEAD SEG_A "    tension: 1 kN\n    colour: red\nend: fixed\n", SE_ERR_FORMAT,
     "t.yaml:9:5:", "unknown key 'colour' in a segment"},
    {"duplicate key", HEAD SEG_A "    tension: 1 kN\n    tension: 2 kN\nend: fixed\n", SE_ERR_FORMAT, "t.yaml:9:5:",
     "duplicate key 'tension'"},
    {"missing value", HEAD "segments:\n  - name: a\n    length:\n    tension: 1 kN\nend: fixed\n", SE_ERR_FORMAT,
     "t.yaml:6:12:", "length: missing value"},
    {"missing required key length", HEAD "segments:\n  - name: a\n    tension: 1 kN\n    mass_per_length: 1 kg/m\n"
                                         "end: fixed\n",
     SE_ERR_FORMAT, "t.yaml:5:5:", "missing required key 'length'"},
    {"missing required key end", HEAD SEG_A "    tension: 1 kN\n", SE_ERR_FORMAT, "t.yaml:1:1:",
     "missing required key 'end'"},
    {"missing unit", HEAD "segments:\n  - name: a\n    length: 100\nend: fixed\n", SE_ERR_UNIT, "t.yaml:6:13:",
     "length:"},
    {"wrong unit", HEAD "segments:\n  - name: a\n    length: 100 kg\nend: fixed\n", SE_ERR_UNIT, "t.yaml:6:13:",
     "length:"},
    {"negative length", HEAD "segments:\n  - name: a\n    length: -5 m\nend: fixed\n", SE_ERR_RANGE, "t.yaml:6:13:",
     "length must be positive"},
    {"zero mass", HEAD "segments:\n  - name: a\n    length: 5 m\n    mass_per_length: 0 kg/m\nend: fixed\n",
     SE_ERR_RANGE, "t.yaml:7:22:", "mass_per_length must be positive"},
    {"negative tension", HEAD SEG_A "    tension: -3 kN\nend: fixed\n", SE_ERR_RANGE, "t.yaml:8:14:",
     "tension must be positive"},
    {"feature beyond its segment", HEAD SEG_A "    tension: 1 kN\n    features:\n      - at: 150 m\n"
                                              "        kind: clamp\nend: fixed\n",
     SE_ERR_RANGE, "t.yaml:10:13:", "beyond its segment 'a'"},
    {"feature without at", HEAD SEG_A "    tension: 1 kN\n    features:\n      - kind: clamp\nend: fixed\n",
     SE_ERR_FORMAT, "t.yaml:10:9:", "missing required key 'at'"},
    {"impossible feature coefficient", HEAD SEG_A "    tension: 1 kN\n    features:\n      - at: 50 m\n"
                                                  "        reflection: 1.5\nend: fixed\n",
     SE_ERR_RANGE, "t.yaml:11:21:", "impossible"},
    {"impossible end coefficient", HEAD SEG_A "    tension: 1 kN\nend: -1.2\n", SE_ERR_RANGE, "t.yaml:9:6:", "end:"},
    {"unknown termination word", HEAD SEG_A "    tension: 1 kN\nend: welded\n", SE_ERR_ARG, "t.yaml:9:6:", "end:"},
    {"conflicting speed definitions", HEAD SEG_A "    tension: 1 kN\n    speed: 30 m/s\nend: fixed\n", SE_ERR_ARG,
     "t.yaml:9:12:", "conflicting speed definitions 'tension' (line 8) and 'speed'"},
    {"tension and hanging", HEAD SEG_A "    tension: 1 kN\n    hanging:\n      weight_in_water: 80 N/m\n"
                                       "      top_tension: 9 kN\nend: fixed\n",
     SE_ERR_ARG, "t.yaml:10:7:", "conflicting speed definitions"},
    {"voltage on a transverse line", "wave: transverse\nquantity: voltage\n" SEG_A "end: fixed\n", SE_ERR_ARG,
     "t.yaml:2:11:", "cannot be measured on a transverse line"},
    {"force on an electrical line", "wave: electrical\nquantity: force\n" SEG_A "end: open\n", SE_ERR_ARG,
     "t.yaml:2:11:", "cannot be measured on an electrical line"},
    {"unknown wave", "wave: sideways\nquantity: velocity\n" SEG_A "end: fixed\n", SE_ERR_FORMAT, "t.yaml:1:7:",
     "unknown wave kind 'sideways'"},
    {"speed beyond c", HEAD "segments:\n  - name: a\n    length: 5 m\n    speed: 4e8 m/s\nend: fixed\n",
     SE_ERR_RANGE, "t.yaml:7:12:", "beyond the speed of light"},
    {"velocity factor above 1", "wave: electrical\nquantity: voltage\nsegments:\n  - name: a\n    length: 5 m\n"
                                "    velocity_factor: 1.2\nend: open\n",
     SE_ERR_RANGE, "t.yaml:6:22:", "velocity_factor 1.2 must be in (0, 1]"},
    {"velocity factor zero", "wave: electrical\nquantity: voltage\nsegments:\n  - name: a\n    length: 5 m\n"
                             "    velocity_factor: 0\nend: open\n",
     SE_ERR_RANGE, "t.yaml:6:22:", "must be in (0, 1]"},
    {"velocity factor on a transverse line", HEAD "segments:\n  - name: a\n    length: 5 m\n"
                                                  "    velocity_factor: 0.5\nend: fixed\n",
     SE_ERR_ARG, "t.yaml:5:5:", "velocity_factor applies to electrical lines"},
    {"tension without mass", HEAD "segments:\n  - name: a\n    length: 5 m\n    tension: 1 kN\nend: fixed\n",
     SE_ERR_ARG, "t.yaml:5:5:", "mass_per_length is required with tension"},
    {"no speed at all", HEAD SEG_A "end: fixed\n", SE_ERR_ARG, "t.yaml:5:5:", "no speed"},
    {"uncertainty without percent", HEAD SEG_A "    tension: 1 kN\n    speed_uncertainty: 2\nend: fixed\n",
     SE_ERR_UNIT, "t.yaml:9:24:", "give it in percent"},
    {"hanging without weight", HEAD SEG_A "    hanging:\n      top_tension: 9 kN\nend: fixed\n", SE_ERR_FORMAT,
     "t.yaml:9:7:", "missing required key 'weight_in_water'"},
    {"hanging unknown key", HEAD SEG_A "    hanging:\n      weight_in_water: 80 N/m\n      top_tensoin: 9 kN\n"
                                       "end: fixed\n",
     SE_ERR_FORMAT, "t.yaml:10:7:", "did you mean 'top_tension'?"},
    {"hanging top tension below weight", HEAD SEG_A "    hanging:\n      weight_in_water: 80 N/m\n"
                                                    "      top_tension: 5 kN\nend: fixed\n",
     SE_ERR_RANGE, "t.yaml:5:5:", "below the vertical load"},
    {"segments not a list", HEAD "segments: 3\nend: fixed\n", SE_ERR_FORMAT, "t.yaml:4:11:",
     "segments must be a non-empty list"},
    {"skin_loss on a transverse segment", HEAD SEG_A "    tension: 1 kN\n    skin_loss: 4e-7\nend: fixed\n",
     SE_ERR_ARG, "t.yaml:9:16:", "skin_loss applies to electrical segments (a cable), not to a transverse line"},
    {"skin_loss on a longitudinal segment", "wave: longitudinal\nquantity: force\n" SEG_A
                                            "    axial_stiffness: 100 MN\n    skin_loss: 4e-7\nend: fixed\n",
     SE_ERR_ARG, "t.yaml:8:16:", "not to a longitudinal line"},
    {"skin_loss without frequency", E_SEG "    skin_loss: 6.6 dB/100 m\nend: open\n", SE_ERR_ARG,
     "t.yaml:7:16:", "skin_loss: skin loss '6.6 dB/100 m': missing frequency"},
    {"skin_loss with an unknown length unit", E_SEG "    skin_loss: 6.6 dB/100 fathom @ 100 MHz\nend: open\n",
     SE_ERR_UNIT, "t.yaml:7:16:", "the length: unknown unit 'fathom'"},
    {"skin_loss with a frequency without unit", E_SEG "    skin_loss: 6.6 dB/100 m @ 100\nend: open\n",
     SE_ERR_UNIT, "t.yaml:7:16:", "missing unit for a frequency"},
    {"negative skin_loss", E_SEG "    skin_loss: -4e-7 s^0.5/m\nend: open\n", SE_ERR_RANGE, "t.yaml:7:16:",
     "is negative"},
    {"skin_loss a bare datasheet number", E_SEG "    skin_loss: 6.6\nend: open\n", SE_ERR_RANGE, "t.yaml:7:16:",
     "above 1"},
    {"skin_loss not finite", E_SEG "    skin_loss: .nan\nend: open\n", SE_ERR_ARG, "t.yaml:7:16:",
     "not a number"},
    {"skin_loss missing value", E_SEG "    skin_loss:\nend: open\n", SE_ERR_FORMAT, "t.yaml:7:",
     "skin_loss: missing value"},
    {"skin_loss unknown key suggestion", E_SEG "    skin_los: 4e-7\nend: open\n", SE_ERR_FORMAT, "t.yaml:7:5:",
     "did you mean 'skin_loss'?"},
    {"empty file", "", SE_ERR_FORMAT, "t.yaml:", "empty line file"},
};

static void test_bad_cases(void)
{
    size_t i;
    for (i = 0; i < sizeof bad_cases / sizeof bad_cases[0]; i++) {
        const bad_case *c = &bad_cases[i];
        se_error err;
        se_line *line;
        char what[600];
        se_error_clear(&err);
        line = se_line_parse_string(c->text, "t.yaml", &err);
        snprintf(what, sizeof what, "%s: NULL, code %s, message '%.400s'", c->what, se_strerror(c->code),
                 err.message);
        se_check(line == NULL && err.code == c->code && strncmp(err.message, c->where, strlen(c->where)) == 0 &&
                     strstr(err.message, c->message) != NULL,
                 __FILE__, __LINE__, what);
        se_line_free(line);
    }
}

static se_line *read_fixture(const char *rel)
{
    char path[1024];
    se_error err;
    se_line *line;
    se_error_clear(&err);
    line = se_line_read(se_test_source_path(path, sizeof path, rel), &err);
    if (line == NULL)
        fprintf(stderr, "%s: %s\n", rel, err.message);
    return line;
}

static void test_fixtures(void)
{
    se_line *leg = read_fixture("fixtures/lines/kestrel-leg3.yaml");
    se_line *axial = read_fixture("fixtures/lines/kestrel-leg3-axial.yaml");
    se_line *guy = read_fixture("fixtures/lines/guy-wire-us.yaml");
    se_line *tether = read_fixture("fixtures/lines/tether-plover.yaml");
    se_line *cable = read_fixture("fixtures/lines/buried-cable.yaml");
    se_line *coax = read_fixture("fixtures/lines/coax-feeder-skin.yaml");
    se_expected_event *ev = NULL;
    size_t n = 0;
    CHECK(leg != NULL && axial != NULL && guy != NULL && tether != NULL && cable != NULL && coax != NULL);
    if (leg != NULL) {
        CHECK(strcmp(leg->name, "Leg 3, Kestrel Bank test buoy") == 0);
        CHECK(leg->n_segments == 3 && leg->wave == SE_WAVE_TRANSVERSE && leg->quantity == SE_Q_VELOCITY);
        CHECK_CLOSE(leg->length_m, 1320.0, 1e-9, "leg length");
        CHECK_CLOSE(leg->segments[0].speed_uncertainty, 0.02, 1e-15, "segment uncertainty 2 %");
        CHECK_CLOSE(leg->segments[1].speed_uncertainty, 0.03, 1e-15, "default uncertainty 3 %");
        CHECK_CLOSE(leg->segments[0].tension_n, 650e3, 1e-6, "650 kN");
        CHECK_CLOSE(leg->segments[0].diameter_m, 0.076, 1e-15, "76 mm");
        CHECK(leg->segments[2].catenary != NULL && leg->segments[2].speed_source == SE_SPEED_HANGING);
        CHECK_CLOSE(leg->end_r, -1.0, 0.0, "fixed end in velocity");
        CHECK(se_line_expected_events(leg, &ev, &n, NULL) == SE_OK);
        CHECK(n == 5);
        if (n == 5) {
            CHECK(strcmp(ev[0].name, "upper shackle") == 0 && ev[0].reflection == -0.1);
            CHECK(strcmp(ev[2].name, "polyester insert splice at 450 m") == 0 && !ev[2].has_reflection);
            /* chain -> polyester: impedance decrease, upright in velocity */
            CHECK(ev[1].type == SE_EVENT_JUNCTION && ev[1].reflection > 0.0);
            CHECK(ev[3].type == SE_EVENT_JUNCTION && ev[3].reflection < 0.0);
        }
        free(ev);
        ev = NULL;
    }
    if (axial != NULL) {
        /* chain ~2069 m/s, DNV-OS-E301 via NREL open mooring coefficients [pub; calc] */
        CHECK_CLOSE(axial->segments[0].speed_m_s, 2069.0, 1.0, "chain axial speed from the file");
        CHECK_CLOSE(axial->source_end_r, -1.0, 0.0, "free source end: +1 in displacement, -1 in force");
    }
    if (guy != NULL) {
        /* 100 ft, 0.2264 lb/ft at 500 lbf: round trip 0.75 s, v 81.3 m/s (amateur tower practice,
         * mailing-list report, 2011 [pub, informal]); unit factors NIST SP 811 */
        CHECK_CLOSE(guy->length_m, 30.48, 1e-12, "100 ft");
        CHECK_CLOSE(guy->segments[0].mass_per_length_kg_m, 0.2264 * 0.45359237 / 0.3048, 1e-12, "lb/ft");
        CHECK_CLOSE(guy->segments[0].speed_m_s, 81.3, 0.1, "guy speed");
        CHECK_CLOSE(guy->round_trip_s, 0.75, 0.002, "guy round trip");
    }
    if (tether != NULL) {
        se_catenary_info info;
        se_catenary_get_info(tether->segments[0].catenary, &info);
        CHECK_CLOSE(info.top_tension_n, 18e3, 1e-6, "tether top tension");
        CHECK(tether->segments[0].speed_far_m_s < tether->segments[0].speed_near_m_s); /* slower at the bottom */
    }
    if (cable != NULL) {
        CHECK(se_line_expected_events(cable, &ev, &n, NULL) == SE_OK);
        CHECK(n == 5);
        if (n == 5) {
            /* joint A then the equal-impedance junction (r = 0), joint B, 28 -> 31 ohm, open end */
            CHECK(strcmp(ev[0].name, "joint A") == 0 && ev[1].type == SE_EVENT_JUNCTION);
            CHECK_CLOSE(ev[1].reflection, 0.0, 1e-15, "equal impedances");
            /* voltage: (Z2 - Z1)/(Z1 + Z2) = 3/59 [calc, REFERENCE.md 1] */
            CHECK_CLOSE(ev[3].reflection, 3.0 / 59.0, 1e-15, "28 -> 31 ohm in voltage");
            CHECK_CLOSE(ev[4].reflection, 1.0, 0.0, "open end +1 in voltage");
            CHECK_CLOSE(ev[4].transmission, 1.0 - 9.0 / 3481.0, 1e-15, "transmission to the end");
        }
        free(ev);
    }
    if (cable != NULL) {
        double k = -1.0;
        CHECK(se_line_skin_loss(cable, &k, NULL) == SE_OK && k == 0.0); /* no skin_loss: none */
    }
    if (coax != NULL) {
        /* K = alpha_dB / (20 log10(e) sqrt(pi f)) per metre: 1 Np = 20 log10(e) dB (ISO 80000-3,
         * NIST SP 811 [pub]), 1 ft = 0.3048 m (NIST SP 811 B.8 [pub]) [calc] */
        const double c = 20.0 / log(10.0), pi = 3.14159265358979323846;
        const double k1 = 4.6 / c / (100.0 * 0.3048) / sqrt(pi * 1e7), k2 = 6.6 / c / 100.0 / sqrt(pi * 1e8);
        double k = -1.0, a = -1.0;
        CHECK(coax->n_segments == 3);
        if (coax->n_segments == 3) {
            CHECK_CLOSE(coax->segments[0].skin_loss_s05_per_m, k1, 1e-15 * k1, "4.6 dB/100 ft @ 10 MHz");
            CHECK_CLOSE(coax->segments[1].skin_loss_s05_per_m, k2, 1e-15 * k2, "6.6 dB/100 m at 100 MHz");
            CHECK(coax->segments[2].skin_loss_s05_per_m == 4.3e-7);
            /* the values the fixture's comment states */
            CHECK_CLOSE(k1, 3.100e-6, 5e-10, "fixture comment: jumper K");
            CHECK_CLOSE(k2, 4.287e-7, 5e-11, "fixture comment: main run K");
            CHECK(se_line_skin_loss(coax, &k, NULL) == SE_OK);
            CHECK_CLOSE(k, (3.0 * k1 + 120.0 * k2 + 9.0 * 4.3e-7) / 132.0, 1e-15 * k, "length-weighted K");
            CHECK_CLOSE(k, 4.895e-7, 5e-11, "fixture comment: line K");
            CHECK(se_line_skin_path(coax, 63.0, &a, NULL) == SE_OK);
            CHECK_CLOSE(a, 2.0 * (3.0 * k1 + 60.0 * k2), 1e-15 * a, "loss to the connector and back");
        }
    }
    se_line_free(coax);
    se_line_free(leg);
    se_line_free(axial);
    se_line_free(guy);
    se_line_free(tether);
    se_line_free(cable);
}

static void test_io_errors(void)
{
    se_error err;
    se_error_clear(&err);
    CHECK(se_line_read("/nonexistent/dir/none.yaml", &err) == NULL && err.code == SE_ERR_IO);
    CHECK(strstr(err.message, "/nonexistent/dir/none.yaml") != NULL);
}

int main(void)
{
    gsl_set_error_handler_off();
    test_bad_cases();
    test_fixtures();
    test_io_errors();
    return se_test_done("test_line_parse");
}
