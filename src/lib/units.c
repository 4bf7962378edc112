/* strandecho: values with units, parsed from text and converted to SI.
 *
 * Each unit is an exact rational mul/div of its SI unit where a definition exists (NIST SP 811,
 * 2008, appendix B): SI = value * mul / div. Decimal sub-multiples divide (3 ms = 3 / 1000 s),
 * which rounds once, so "3ms" gives the same double as "0.003 s".
 */
#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/units.h"

/* Exact definitions (NIST SP 811, 2008, appendix B). */
#define SE_FT 0.3048
#define SE_IN 0.0254
#define SE_LB 0.45359237
#define SE_G0 9.80665
#define SE_LBF (SE_LB * SE_G0) /* 4.4482216152605 N */

/* Longest unit text we look at (a unit name, not a sentence). */
#define SE_UNIT_TEXT_MAX 32
/* Longest number text. */
#define SE_NUMBER_TEXT_MAX 64

typedef struct se_unit_def {
    se_unit_kind kind;
    const char *name;
    double mul; /* SI = value * mul / div */
    double div;
} se_unit_def;

typedef struct se_kind_info {
    const char *si;
    const char *noun;
    const char *hint; /* accepted units, for messages */
} se_kind_info;

static const se_unit_def *se_unit_find(se_unit_kind kind, const char *name);
static const se_unit_def *se_unit_find_caseless(se_unit_kind kind, const char *name);
static const se_unit_def *se_unit_find_any_kind(const char *name);
static size_t se_scan_number(const char *s);
static int se_is_space(char c);
static int se_looks_nonfinite(const char *s);
static se_status se_unit_unknown(se_unit_kind kind, const char *unit, const char *text,
                                 se_error *err);
static double se_unit_apply(const se_unit_def *u, double v);

static const se_kind_info se_kinds[SE_UNIT_KIND_COUNT] = {
    [SE_UNIT_LENGTH] = {"m", "a length", "m, km, cm, mm, ft, in, yd, mi, nmi"},
    [SE_UNIT_SPEED] = {"m/s", "a speed", "m/s, km/s, ft/s, m/us, ft/us, m/ms, km/h, kn"},
    [SE_UNIT_FORCE] = {"N", "a force", "N, kN, MN, lbf, kip, tf, kgf"},
    [SE_UNIT_LINEAR_DENSITY] = {"kg/m", "a linear density", "kg/m, g/m, kg/km, lb/ft"},
    [SE_UNIT_WEIGHT_PER_LENGTH] = {"N/m", "a weight per length", "N/m, kN/m, lbf/ft"},
    [SE_UNIT_TIME] = {"s", "a time", "s, ms, us, ns, min"},
    [SE_UNIT_FREQUENCY] = {"Hz", "a frequency", "Hz, kHz, MHz, GHz"},
    [SE_UNIT_RATIO] = {"", "a ratio", "a plain number or %"},
    [SE_UNIT_IMPEDANCE] = {"ohm", "an impedance", "ohm, kohm, N s/m"},
    [SE_UNIT_STIFFNESS] = {"N", "an axial stiffness", "N, kN, MN, GN, lbf, kip"},
    [SE_UNIT_PRESSURE] = {"Pa", "a pressure", "Pa, kPa, MPa, GPa, psi, ksi"},
    [SE_UNIT_DENSITY] = {"kg/m3", "a density", "kg/m3, g/cm3, t/m3, lb/ft3"},
};

/* "\xc2\xb5" is U+00B5 MICRO SIGN, "\xce\xbc" U+03BC GREEK SMALL LETTER MU,
 * "\xce\xa9" U+03A9 GREEK CAPITAL LETTER OMEGA, "\xe2\x84\xa6" U+2126 OHM SIGN,
 * "\xc2\xb7" U+00B7 MIDDLE DOT, "\xc2\xb3" U+00B3 SUPERSCRIPT THREE. */
static const se_unit_def se_units[] = {
    {SE_UNIT_LENGTH, "m", 1.0, 1.0},
    {SE_UNIT_LENGTH, "km", 1000.0, 1.0},
    {SE_UNIT_LENGTH, "cm", 1.0, 100.0},
    {SE_UNIT_LENGTH, "mm", 1.0, 1000.0},
    {SE_UNIT_LENGTH, "ft", SE_FT, 1.0},
    {SE_UNIT_LENGTH, "in", SE_IN, 1.0},
    {SE_UNIT_LENGTH, "yd", 0.9144, 1.0},
    {SE_UNIT_LENGTH, "mi", 1609.344, 1.0},
    {SE_UNIT_LENGTH, "nmi", 1852.0, 1.0},

    {SE_UNIT_SPEED, "m/s", 1.0, 1.0},
    {SE_UNIT_SPEED, "km/s", 1000.0, 1.0},
    {SE_UNIT_SPEED, "ft/s", SE_FT, 1.0},
    {SE_UNIT_SPEED, "m/us", 1e6, 1.0},
    {SE_UNIT_SPEED, "m/\xc2\xb5s", 1e6, 1.0},
    {SE_UNIT_SPEED, "m/\xce\xbcs", 1e6, 1.0},
    {SE_UNIT_SPEED, "ft/us", SE_FT * 1e6, 1.0},
    {SE_UNIT_SPEED, "ft/\xc2\xb5s", SE_FT * 1e6, 1.0},
    {SE_UNIT_SPEED, "ft/\xce\xbcs", SE_FT * 1e6, 1.0},
    {SE_UNIT_SPEED, "m/ms", 1000.0, 1.0},
    {SE_UNIT_SPEED, "km/h", 1000.0, 3600.0},
    {SE_UNIT_SPEED, "kn", 1852.0, 3600.0},
    {SE_UNIT_SPEED, "kt", 1852.0, 3600.0},
    {SE_UNIT_SPEED, "mph", 1609.344, 3600.0},

    {SE_UNIT_FORCE, "N", 1.0, 1.0},
    {SE_UNIT_FORCE, "kN", 1000.0, 1.0},
    {SE_UNIT_FORCE, "KN", 1000.0, 1.0},
    {SE_UNIT_FORCE, "MN", 1e6, 1.0},
    {SE_UNIT_FORCE, "lbf", SE_LBF, 1.0},
    {SE_UNIT_FORCE, "kip", SE_LBF * 1000.0, 1.0},
    {SE_UNIT_FORCE, "tf", SE_G0 * 1000.0, 1.0},
    {SE_UNIT_FORCE, "kgf", SE_G0, 1.0},

    {SE_UNIT_LINEAR_DENSITY, "kg/m", 1.0, 1.0},
    {SE_UNIT_LINEAR_DENSITY, "g/m", 1.0, 1000.0},
    {SE_UNIT_LINEAR_DENSITY, "kg/km", 1.0, 1000.0},
    {SE_UNIT_LINEAR_DENSITY, "lb/ft", SE_LB, SE_FT},

    {SE_UNIT_WEIGHT_PER_LENGTH, "N/m", 1.0, 1.0},
    {SE_UNIT_WEIGHT_PER_LENGTH, "kN/m", 1000.0, 1.0},
    {SE_UNIT_WEIGHT_PER_LENGTH, "KN/m", 1000.0, 1.0},
    {SE_UNIT_WEIGHT_PER_LENGTH, "lbf/ft", SE_LBF, SE_FT},

    {SE_UNIT_TIME, "s", 1.0, 1.0},
    {SE_UNIT_TIME, "ms", 1.0, 1e3},
    {SE_UNIT_TIME, "us", 1.0, 1e6},
    {SE_UNIT_TIME, "\xc2\xb5s", 1.0, 1e6},
    {SE_UNIT_TIME, "\xce\xbcs", 1.0, 1e6},
    {SE_UNIT_TIME, "ns", 1.0, 1e9},
    {SE_UNIT_TIME, "min", 60.0, 1.0},
    {SE_UNIT_TIME, "h", 3600.0, 1.0},

    {SE_UNIT_FREQUENCY, "Hz", 1.0, 1.0},
    {SE_UNIT_FREQUENCY, "kHz", 1e3, 1.0},
    {SE_UNIT_FREQUENCY, "KHz", 1e3, 1.0},
    {SE_UNIT_FREQUENCY, "MHz", 1e6, 1.0},
    {SE_UNIT_FREQUENCY, "GHz", 1e9, 1.0},

    {SE_UNIT_RATIO, "", 1.0, 1.0},
    {SE_UNIT_RATIO, "%", 1.0, 100.0},

    {SE_UNIT_IMPEDANCE, "ohm", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "ohms", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "\xce\xa9", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "\xe2\x84\xa6", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "kohm", 1e3, 1.0},
    {SE_UNIT_IMPEDANCE, "k\xce\xa9", 1e3, 1.0},
    {SE_UNIT_IMPEDANCE, "k\xe2\x84\xa6", 1e3, 1.0},
    {SE_UNIT_IMPEDANCE, "N s/m", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "Ns/m", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "N*s/m", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "N.s/m", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "N\xc2\xb7s/m", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "kg/s", 1.0, 1.0},
    {SE_UNIT_IMPEDANCE, "kN s/m", 1e3, 1.0},

    {SE_UNIT_STIFFNESS, "N", 1.0, 1.0},
    {SE_UNIT_STIFFNESS, "kN", 1e3, 1.0},
    {SE_UNIT_STIFFNESS, "KN", 1e3, 1.0},
    {SE_UNIT_STIFFNESS, "MN", 1e6, 1.0},
    {SE_UNIT_STIFFNESS, "GN", 1e9, 1.0},
    {SE_UNIT_STIFFNESS, "lbf", SE_LBF, 1.0},
    {SE_UNIT_STIFFNESS, "kip", SE_LBF * 1000.0, 1.0},

    {SE_UNIT_PRESSURE, "Pa", 1.0, 1.0},
    {SE_UNIT_PRESSURE, "kPa", 1e3, 1.0},
    {SE_UNIT_PRESSURE, "MPa", 1e6, 1.0},
    {SE_UNIT_PRESSURE, "GPa", 1e9, 1.0},
    {SE_UNIT_PRESSURE, "N/m2", 1.0, 1.0},
    {SE_UNIT_PRESSURE, "N/mm2", 1e6, 1.0},
    {SE_UNIT_PRESSURE, "psi", SE_LBF, SE_IN *SE_IN},
    {SE_UNIT_PRESSURE, "ksi", SE_LBF * 1000.0, SE_IN *SE_IN},

    {SE_UNIT_DENSITY, "kg/m3", 1.0, 1.0},
    {SE_UNIT_DENSITY, "kg/m^3", 1.0, 1.0},
    {SE_UNIT_DENSITY, "kg/m\xc2\xb3", 1.0, 1.0},
    {SE_UNIT_DENSITY, "g/cm3", 1000.0, 1.0},
    {SE_UNIT_DENSITY, "t/m3", 1000.0, 1.0},
    {SE_UNIT_DENSITY, "lb/ft3", SE_LB, SE_FT *SE_FT *SE_FT},
};

#define SE_UNIT_COUNT (sizeof se_units / sizeof se_units[0])

static int se_is_space(char c)
{
    return c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\f' || c == '\v';
}

static int se_kind_ok(se_unit_kind kind)
{
    return (int)kind >= 0 && kind < SE_UNIT_KIND_COUNT;
}

const char *se_unit_si_name(se_unit_kind kind)
{
    return se_kind_ok(kind) ? se_kinds[kind].si : NULL;
}

const char *se_unit_kind_noun(se_unit_kind kind)
{
    return se_kind_ok(kind) ? se_kinds[kind].noun : NULL;
}

static const se_unit_def *se_unit_find(se_unit_kind kind, const char *name)
{
    size_t i;
    for (i = 0; i < SE_UNIT_COUNT; i++)
        if (se_units[i].kind == kind && strcmp(se_units[i].name, name) == 0)
            return &se_units[i];
    return NULL;
}

/* ASCII case-insensitive match, only used to explain a rejection ("mN" -> did you mean "MN"). */
static const se_unit_def *se_unit_find_caseless(se_unit_kind kind, const char *name)
{
    size_t i;
    for (i = 0; i < SE_UNIT_COUNT; i++) {
        const char *a = se_units[i].name, *b = name;
        if (se_units[i].kind != kind || a[0] == '\0')
            continue;
        while (*a != '\0' && *b != '\0' &&
               tolower((unsigned char)*a) == tolower((unsigned char)*b)) {
            a++;
            b++;
        }
        if (*a == '\0' && *b == '\0')
            return &se_units[i];
    }
    return NULL;
}

static const se_unit_def *se_unit_find_any_kind(const char *name)
{
    size_t i;
    for (i = 0; i < SE_UNIT_COUNT; i++)
        if (se_units[i].name[0] != '\0' && strcmp(se_units[i].name, name) == 0)
            return &se_units[i];
    return NULL;
}

static double se_unit_apply(const se_unit_def *u, double v)
{
    if (u->mul == 1.0)
        return v / u->div;
    if (u->div == 1.0)
        return v * u->mul;
    return v * u->mul / u->div;
}

/* Length of the decimal number at s: [+-](digits[.digits*] | .digits)[(e|E)[+-]digits], or 0. */
static size_t se_scan_number(const char *s)
{
    size_t i = 0, digits = 0;
    if (s[i] == '+' || s[i] == '-')
        i++;
    while (isdigit((unsigned char)s[i])) {
        i++;
        digits++;
    }
    if (s[i] == '.') {
        i++;
        while (isdigit((unsigned char)s[i])) {
            i++;
            digits++;
        }
    }
    if (digits == 0)
        return 0;
    if (s[i] == 'e' || s[i] == 'E') {
        size_t j = i + 1;
        if (s[j] == '+' || s[j] == '-')
            j++;
        if (isdigit((unsigned char)s[j])) {
            while (isdigit((unsigned char)s[j]))
                j++;
            i = j;
        }
    }
    return i;
}

/* "nan", "inf", "infinity" with an optional sign, any case. */
static int se_looks_nonfinite(const char *s)
{
    if (*s == '+' || *s == '-')
        s++;
    return (tolower((unsigned char)s[0]) == 'n' && tolower((unsigned char)s[1]) == 'a' &&
            tolower((unsigned char)s[2]) == 'n') ||
           (tolower((unsigned char)s[0]) == 'i' && tolower((unsigned char)s[1]) == 'n' &&
            tolower((unsigned char)s[2]) == 'f');
}

static se_status se_unit_unknown(se_unit_kind kind, const char *unit, const char *text,
                                 se_error *err)
{
    const se_unit_def *near = se_unit_find_caseless(kind, unit);
    const se_unit_def *other;
    const char *space;
    if (near != NULL)
        return se_fail(err, SE_ERR_UNIT,
                       "unit '%s' in '%s' is not %s unit: units are case-sensitive, did you mean "
                       "'%s'? (use %s)",
                       unit, text, se_kinds[kind].noun, near->name, se_kinds[kind].hint);
    /* "100 kN x": a valid unit followed by something else. */
    space = strchr(unit, ' ');
    if (space != NULL) {
        char head[SE_UNIT_TEXT_MAX + 1];
        size_t n = (size_t)(space - unit);
        memcpy(head, unit, n);
        head[n] = '\0';
        if (se_unit_find(kind, head) != NULL)
            return se_fail(err, SE_ERR_UNIT, "trailing text '%s' after the unit '%s' in '%s'",
                           space + 1, head, text);
    }
    other = se_unit_find_any_kind(unit);
    if (other != NULL && other->kind != kind)
        return se_fail(err, SE_ERR_UNIT, "unknown unit '%s' for %s (use %s; '%s' is for %s)", unit,
                       se_kinds[kind].noun, se_kinds[kind].hint, unit, se_kinds[other->kind].noun);
    return se_fail(err, SE_ERR_UNIT, "unknown unit '%s' for %s (use %s)", unit, se_kinds[kind].noun,
                   se_kinds[kind].hint);
}

se_status se_unit_parse(const char *text, se_unit_kind kind, const char *default_unit, double *si,
                        se_error *err)
{
    char num[SE_NUMBER_TEXT_MAX];
    char unit[SE_UNIT_TEXT_MAX + 1];
    const char *p, *end;
    const se_unit_def *u;
    size_t len, nu = 0;
    double v, out;
    char *stop;

    if (!se_kind_ok(kind))
        return se_fail(err, SE_ERR_ARG, "unit kind %d out of range", (int)kind);
    if (text == NULL || si == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_unit_parse");
    p = text;
    while (se_is_space(*p))
        p++;
    if (*p == '\0')
        return se_fail(err, SE_ERR_ARG, "empty value where %s was expected", se_kinds[kind].noun);
    len = se_scan_number(p);
    if (len == 0) {
        if (se_looks_nonfinite(p))
            return se_fail(err, SE_ERR_ARG, "not a finite number: '%s'", text);
        return se_fail(err, SE_ERR_ARG, "not a number: '%s'", text);
    }
    if (len >= sizeof num)
        return se_fail(err, SE_ERR_ARG, "number too long in '%.40s...'", text);
    memcpy(num, p, len);
    num[len] = '\0';
    errno = 0;
    v = strtod(num, &stop);
    if (*stop != '\0')
        return se_fail(err, SE_ERR_ARG, "not a number: '%s'", text);
    if (errno == ERANGE && fabs(v) > 1.0)
        return se_fail(err, SE_ERR_RANGE, "number '%s' in '%s' is too large", num, text);
    if (!isfinite(v))
        return se_fail(err, SE_ERR_ARG, "not a finite number: '%s'", text);

    /* The unit: the rest, trimmed, inner white space runs collapsed to one space. */
    p += len;
    while (se_is_space(*p))
        p++;
    end = p + strlen(p);
    while (end > p && se_is_space(end[-1]))
        end--;
    while (p < end) {
        if (se_is_space(*p)) {
            while (p < end && se_is_space(*p))
                p++;
            if (nu < SE_UNIT_TEXT_MAX)
                unit[nu++] = ' ';
            continue;
        }
        if (nu >= SE_UNIT_TEXT_MAX)
            return se_fail(err, SE_ERR_UNIT, "unit text too long in '%.40s...'", text);
        unit[nu++] = *p++;
    }
    unit[nu] = '\0';

    if (nu > 0 &&
        (isdigit((unsigned char)unit[0]) || unit[0] == '.' || unit[0] == '+' || unit[0] == '-'))
        return se_fail(err, SE_ERR_ARG, "not a number: '%s'", text);

    if (nu == 0 && kind != SE_UNIT_RATIO) {
        if (default_unit == NULL)
            return se_fail(err, SE_ERR_UNIT, "missing unit for %s in '%s' (use %s)",
                           se_kinds[kind].noun, text, se_kinds[kind].hint);
        u = se_unit_find(kind, default_unit);
        if (u == NULL)
            return se_fail(err, SE_ERR_ARG, "default unit '%s' is not %s unit (use %s)",
                           default_unit, se_kinds[kind].noun, se_kinds[kind].hint);
    } else if (nu == 0) {
        u = se_unit_find(kind, default_unit != NULL ? default_unit : "");
        if (u == NULL)
            return se_fail(err, SE_ERR_ARG, "default unit '%s' is not %s unit (use %s)",
                           default_unit, se_kinds[kind].noun, se_kinds[kind].hint);
    } else {
        u = se_unit_find(kind, unit);
        if (u == NULL)
            return se_unit_unknown(kind, unit, text, err);
    }
    out = se_unit_apply(u, v);
    if (!isfinite(out))
        return se_fail(err, SE_ERR_RANGE, "'%s' overflows when converted to %s", text,
                       se_kinds[kind].si[0] ? se_kinds[kind].si : "a plain number");
    *si = out;
    return SE_OK;
}

se_status se_unit_factor(se_unit_kind kind, const char *unit, double *factor, se_error *err)
{
    const se_unit_def *u;
    if (!se_kind_ok(kind))
        return se_fail(err, SE_ERR_ARG, "unit kind %d out of range", (int)kind);
    if (unit == NULL || factor == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_unit_factor");
    u = se_unit_find(kind, unit);
    if (u == NULL)
        return se_fail(err, SE_ERR_UNIT, "unknown unit '%s' for %s (use %s)", unit,
                       se_kinds[kind].noun, se_kinds[kind].hint);
    *factor = u->mul / u->div;
    return SE_OK;
}

se_status se_unit_from_si(double si, se_unit_kind kind, const char *unit, double *out,
                          se_error *err)
{
    const se_unit_def *u;
    if (!se_kind_ok(kind))
        return se_fail(err, SE_ERR_ARG, "unit kind %d out of range", (int)kind);
    if (unit == NULL || out == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_unit_from_si");
    if (!isfinite(si))
        return se_fail(err, SE_ERR_ARG, "cannot convert a non-finite value to '%s'", unit);
    u = se_unit_find(kind, unit);
    if (u == NULL)
        return se_fail(err, SE_ERR_UNIT, "unknown unit '%s' for %s (use %s)", unit,
                       se_kinds[kind].noun, se_kinds[kind].hint);
    /* Inverse of se_unit_apply: value = SI * div / mul. */
    if (u->mul == 1.0)
        *out = si * u->div;
    else if (u->div == 1.0)
        *out = si / u->mul;
    else
        *out = si * u->div / u->mul;
    return SE_OK;
}

/* ---- skin-effect loss: K in s^0.5/m or a datasheet attenuation ------------------------------ */

/* Longest skin-loss text looked at. */
#define SE_SKIN_TEXT_MAX 128

static se_status se_skin_copy_trim(const char *s, size_t n, char *out, size_t size);
static int se_skin_is_k_unit(const char *unit);

/* Copy s[0..n) without leading and trailing white space into out; -1 if it does not fit. */
static se_status se_skin_copy_trim(const char *s, size_t n, char *out, size_t size)
{
    while (n > 0 && se_is_space(*s)) {
        s++;
        n--;
    }
    while (n > 0 && se_is_space(s[n - 1]))
        n--;
    if (n + 1 > size)
        return SE_ERR_RANGE;
    memcpy(out, s, n);
    out[n] = '\0';
    return SE_OK;
}

/* "s^0.5/m" and its spellings, white space ignored. */
static int se_skin_is_k_unit(const char *unit)
{
    static const char *const names[] = {"s^0.5/m", "s^.5/m", "s^(1/2)/m", "s^1/2/m",
                                        "sqrt(s)/m", "s0.5/m", "\xe2\x88\x9as/m", NULL};
    char compact[SE_SKIN_TEXT_MAX];
    size_t i, n = 0;
    for (i = 0; unit[i] != '\0' && n + 1 < sizeof compact; i++)
        if (!se_is_space(unit[i]))
            compact[n++] = unit[i];
    compact[n] = '\0';
    for (i = 0; names[i] != NULL; i++)
        if (strcmp(compact, names[i]) == 0)
            return 1;
    return 0;
}

se_status se_skin_loss_from_attenuation(double db_per_length, double length_m, double freq_hz,
                                        double *k_s05_per_m, se_error *err)
{
    double k;
    if (k_s05_per_m == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_skin_loss_from_attenuation");
    if (!isfinite(db_per_length) || db_per_length < 0.0)
        return se_fail(err, SE_ERR_RANGE, "attenuation %g dB must be finite and not negative",
                       db_per_length);
    if (!isfinite(length_m) || !(length_m > 0.0))
        return se_fail(err, SE_ERR_RANGE, "attenuation per %g m: the length must be positive",
                       length_m);
    if (!isfinite(freq_hz) || !(freq_hz > 0.0))
        return se_fail(err, SE_ERR_RANGE, "attenuation at %g Hz: the frequency must be positive",
                       freq_hz);
    /* |H(j w)| = exp(-K l sqrt(w / 2)) = exp(-K l sqrt(pi f)): alpha = K sqrt(pi f) Np/m */
    k = db_per_length / SE_DB_PER_NEPER / length_m / sqrt(SE_PI * freq_hz);
    if (!isfinite(k))
        return se_fail(err, SE_ERR_RANGE, "%g dB per %g m at %g Hz overflows as K", db_per_length,
                       length_m, freq_hz);
    *k_s05_per_m = k;
    return SE_OK;
}

double se_skin_loss_attenuation_db(double k_s05_per_m, double length_m, double freq_hz)
{
    if (!isfinite(k_s05_per_m) || !isfinite(length_m) || !isfinite(freq_hz) ||
        k_s05_per_m < 0.0 || length_m < 0.0 || freq_hz < 0.0)
        return NAN;
    return SE_DB_PER_NEPER * k_s05_per_m * length_m * sqrt(SE_PI * freq_hz);
}

se_status se_skin_loss_parse(const char *text, double *k_s05_per_m, se_error *err)
{
    static const char *const hint = "give K in s^0.5/m, e.g. '4e-7', or a datasheet attenuation, "
                                    "e.g. '6.6 dB/100 m @ 100 MHz'";
    char buf[SE_SKIN_TEXT_MAX], num[SE_NUMBER_TEXT_MAX], len_text[SE_SKIN_TEXT_MAX];
    char freq_text[SE_SKIN_TEXT_MAX];
    const char *rest, *at;
    size_t nn, len_n;
    double v, k, per_m, freq_hz, np_factor;
    se_error sub;
    se_status st;
    char *end;

    if (text == NULL || k_s05_per_m == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_skin_loss_parse");
    if (se_skin_copy_trim(text, strlen(text), buf, sizeof buf) != SE_OK)
        return se_fail(err, SE_ERR_ARG, "skin loss '%.60s...': too long for a value", text);
    if (buf[0] == '\0')
        return se_fail(err, SE_ERR_ARG, "skin loss: empty value (%s)", hint);
    if (se_looks_nonfinite(buf))
        return se_fail(err, SE_ERR_ARG, "skin loss '%s': not a finite number", buf);
    nn = se_scan_number(buf);
    if (nn == 0)
        return se_fail(err, SE_ERR_ARG, "skin loss '%s': not a number (%s)", buf, hint);
    if (nn >= sizeof num)
        return se_fail(err, SE_ERR_ARG, "skin loss '%s': number too long", buf);
    memcpy(num, buf, nn);
    num[nn] = '\0';
    errno = 0;
    v = strtod(num, &end);
    if (errno == ERANGE && fabs(v) > 1.0)
        return se_fail(err, SE_ERR_RANGE, "skin loss '%s': the number overflows a double", buf);
    if (!isfinite(v))
        return se_fail(err, SE_ERR_ARG, "skin loss '%s': not a finite number", buf);
    if (v < 0.0)
        return se_fail(err, SE_ERR_RANGE, "skin loss '%s' is negative: a loss is >= 0", buf);
    rest = buf + nn;
    while (se_is_space(*rest))
        rest++;

    if (*rest == '\0' || se_skin_is_k_unit(rest)) {
        k = v;
    } else {
        if (strncmp(rest, "dB", 2) == 0 || strncmp(rest, "db", 2) == 0)
            np_factor = 1.0;
        else if (strncmp(rest, "Np", 2) == 0)
            np_factor = SE_DB_PER_NEPER;
        else
            return se_fail(err, SE_ERR_UNIT, "skin loss '%s': unknown unit '%s' (%s)", buf, rest,
                           hint);
        rest += 2;
        while (se_is_space(*rest))
            rest++;
        if (*rest == '/')
            rest++;
        else if (strncmp(rest, "per", 3) == 0 && se_is_space(rest[3]))
            rest += 4;
        else
            return se_fail(err, SE_ERR_ARG,
                           "skin loss '%s': missing length: an attenuation is per a length of "
                           "cable, e.g. '%.2s/100 m @ 100 MHz'",
                           buf, np_factor == 1.0 ? "dB" : "Np");
        at = strchr(rest, '@');
        if (at == NULL) {
            const char *w = strstr(rest, " at ");
            if (w == NULL)
                w = strstr(rest, "\tat ");
            at = w != NULL ? w + 1 : NULL;
            len_n = at != NULL ? (size_t)(at - rest) : strlen(rest);
            if (at != NULL)
                at += 2;
        } else {
            len_n = (size_t)(at - rest);
            at += 1;
        }
        if (at == NULL)
            return se_fail(err, SE_ERR_ARG,
                           "skin loss '%s': missing frequency: a datasheet attenuation holds at "
                           "one frequency, write e.g. '%s @ 100 MHz'",
                           buf, buf);
        /* the length, with a count of 1 when only a unit is written ("dB/km") */
        if (se_skin_copy_trim(rest, len_n, len_text + 2, sizeof len_text - 2) != SE_OK)
            return se_fail(err, SE_ERR_ARG, "skin loss '%s': length too long", buf);
        if (len_text[2] == '\0')
            return se_fail(err, SE_ERR_ARG,
                           "skin loss '%s': missing length after '/', e.g. '/100 m'", buf);
        if (se_scan_number(len_text + 2) == 0 && !se_looks_nonfinite(len_text + 2)) {
            len_text[0] = '1';
            len_text[1] = ' ';
            rest = len_text;
        } else {
            rest = len_text + 2;
        }
        se_error_clear(&sub);
        st = se_unit_parse(rest, SE_UNIT_LENGTH, NULL, &per_m, &sub);
        if (st != SE_OK)
            return se_fail(err, st, "skin loss '%s': the length: %s", buf, sub.message);
        if (!(per_m > 0.0))
            return se_fail(err, SE_ERR_RANGE, "skin loss '%s': the length must be positive", buf);
        if (se_skin_copy_trim(at, strlen(at), freq_text, sizeof freq_text) != SE_OK)
            return se_fail(err, SE_ERR_ARG, "skin loss '%s': frequency too long", buf);
        if (freq_text[0] == '\0')
            return se_fail(err, SE_ERR_ARG,
                           "skin loss '%s': missing frequency after '@', e.g. '@ 100 MHz'", buf);
        se_error_clear(&sub);
        st = se_unit_parse(freq_text, SE_UNIT_FREQUENCY, NULL, &freq_hz, &sub);
        if (st != SE_OK)
            return se_fail(err, st, "skin loss '%s': the frequency: %s", buf, sub.message);
        if (!(freq_hz > 0.0))
            return se_fail(err, SE_ERR_RANGE, "skin loss '%s': the frequency must be positive",
                           buf);
        se_error_clear(&sub);
        st = se_skin_loss_from_attenuation(v * np_factor, per_m, freq_hz, &k, &sub);
        if (st != SE_OK)
            return se_fail(err, st, "skin loss '%s': %s", buf, sub.message);
    }
    if (!isfinite(k))
        return se_fail(err, SE_ERR_RANGE, "skin loss '%s' overflows", buf);
    if (k > SE_SKIN_LOSS_MAX)
        return se_fail(err, SE_ERR_RANGE,
                       "skin loss '%s' is K = %g s^0.5/m, above %g: not a cable's (they lie near "
                       "1e-8 to 1e-5 s^0.5/m); a datasheet figure needs its unit, e.g. '6.6 "
                       "dB/100 m @ 100 MHz'",
                       buf, k, SE_SKIN_LOSS_MAX);
    *k_s05_per_m = k;
    return SE_OK;
}
