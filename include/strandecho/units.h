/* strandecho: values with units, parsed from text and converted to SI.
 *
 * Every physical value the tool reads (lengths, speeds, tensions, masses per length, times,
 * frequencies, impedances...) goes through se_unit_parse(), which returns the value in the SI unit
 * of its kind (se_unit_si_name()). Conversion factors are exact where a definition exists:
 * ft = 0.3048 m, in = 0.0254 m, yd = 0.9144 m, mi = 1609.344 m, nmi = 1852 m, kn = 1852/3600 m/s,
 * lb = 0.45359237 kg, lbf = lb x 9.80665 m/s^2 = 4.4482216152605 N, kgf = 9.80665 N,
 * tf = 1000 kgf, kip = 1000 lbf, psi = lbf/in^2 (NIST SP 811, 2008 edition, appendix B).
 *
 * Unit names are case-sensitive where case carries meaning (MN is a meganewton, mN would be a
 * millinewton and is rejected rather than guessed); "kN" and "KN", "kHz" and "KHz" are both
 * accepted. "us", "\u00b5s" (micro sign) and "\u03bcs" (Greek mu) are all microseconds; "ohm",
 * "\u03a9" and "\u2126" are all ohms. The library keeps no state: every function is reentrant.
 *
 * A cable's skin-effect loss has its own parser, se_skin_loss_parse(), taking K in s^0.5/m or a
 * datasheet attenuation ("6.6 dB/100 m @ 100 MHz"): every option and file key that takes a skin
 * loss goes through it.
 */
#ifndef SE_UNITS_H
#define SE_UNITS_H

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The kinds of value, with their SI unit and the other accepted unit names. */
typedef enum se_unit_kind {
    SE_UNIT_LENGTH,            /* m (SI); km, cm, mm, ft, in, yd, mi, nmi */
    SE_UNIT_SPEED,             /* m/s; km/s, ft/s, m/us, ft/us, m/ms, km/h, kn, mph */
    SE_UNIT_FORCE,             /* N; kN, MN, lbf, kip, tf (metric tonne-force), kgf */
    SE_UNIT_LINEAR_DENSITY,    /* kg/m; g/m, lb/ft, kg/km */
    SE_UNIT_WEIGHT_PER_LENGTH, /* N/m; kN/m, lbf/ft */
    SE_UNIT_TIME,              /* s; ms, us, ns, min, h */
    SE_UNIT_FREQUENCY,         /* Hz; kHz, MHz, GHz */
    SE_UNIT_RATIO,             /* plain number (no unit needed); "%" divides by 100 */
    SE_UNIT_IMPEDANCE,         /* ohm or N s/m (both accepted: the caller knows which); kohm */
    SE_UNIT_STIFFNESS,         /* axial stiffness EA in N; kN, MN, GN, lbf, kip */
    SE_UNIT_PRESSURE,          /* Pa; kPa, MPa, GPa, psi, ksi, N/mm2 */
    SE_UNIT_DENSITY,           /* kg/m3; g/cm3, t/m3, lb/ft3 */
    SE_UNIT_KIND_COUNT         /* sentinel: number of kinds, not a kind */
} se_unit_kind;

/* Parse a number with an optional unit and return it in SI.
 *  text         : e.g. "100 kN", "5kg/m", "141.4", "2 %", "-3.5e2 ft/s". Leading and trailing
 *                 white space is ignored; white space between number and unit is optional.
 *                 The number is decimal ([+-]digits[.digits][e[+-]digits]); hex, "nan" and
 *                 "inf" are refused.
 *  kind         : what the value is; decides the accepted units.
 *  default_unit : unit assumed when the text has none (e.g. "m/s"); NULL = a unit is required
 *                 (except for SE_UNIT_RATIO, where a plain number is always accepted).
 *  si           : [out] the value in the SI unit of kind; untouched on failure.
 *  err          : [out, may be NULL] filled on failure.
 * Returns SE_OK; SE_ERR_ARG for NULL/empty text, "not a number: '...'", a non-finite number,
 * or an unknown default_unit; SE_ERR_UNIT for an unknown, wrongly cased or missing unit (the
 * message lists the accepted units) or trailing text after the unit; SE_ERR_RANGE when the
 * number or its SI value overflows a double. */
se_status se_unit_parse(const char *text, se_unit_kind kind, const char *default_unit, double *si,
                        se_error *err);

/* SI unit name of a kind: "m", "m/s", "N", "kg/m", "N/m", "s", "Hz", "" (ratio), "ohm"
 * (impedance; the same number is N s/m for a mechanical line), "N" (stiffness), "Pa", "kg/m3".
 * Static string; NULL for a kind out of range. */
const char *se_unit_si_name(se_unit_kind kind);

/* Noun phrase for messages: "a length", "a speed", "an impedance"...; NULL out of range. */
const char *se_unit_kind_noun(se_unit_kind kind);

/* Convert an SI value to a named unit of that kind, for printing (e.g. metres to "ft").
 *  si   : value in the SI unit of kind.
 *  unit : any unit name se_unit_parse() accepts for kind ("" or "%" for a ratio).
 *  out  : [out] si expressed in unit.
 * Returns SE_OK, SE_ERR_ARG for NULL pointers or a non-finite si, SE_ERR_UNIT for a unit that
 * is not one of kind. */
se_status se_unit_from_si(double si, se_unit_kind kind, const char *unit, double *out,
                          se_error *err);

/* Factor of a unit: SI value = value x factor (e.g. 0.3048 for "ft" as a length).
 * Returns SE_OK or SE_ERR_UNIT as se_unit_from_si(). */
se_status se_unit_factor(se_unit_kind kind, const char *unit, double *factor, se_error *err);

/* Decibels per neper, 20 log10(e) = 20 / ln 10 (exact relation 1 Np = 20 log10(e) dB:
 * ISO 80000-3 and NIST SP 811, 2008, on the neper and the bel): an amplitude ratio exp(-x) is 20 log10(e) x dB. */
#define SE_DB_PER_NEPER 8.6858896380650365530

/* Largest skin-loss constant accepted, s^0.5/m. Cables lie near 1e-8 .. 1e-5 s^0.5/m (a coaxial
 * cable of 6.6 dB/100 m at 100 MHz is 4.3e-7); a bare number above this is taken for a misplaced
 * datasheet figure (e.g. "6.6" without its "dB/100 m @ 100 MHz") and refused. */
#define SE_SKIN_LOSS_MAX 1.0

/* Parse a cable's skin-effect loss constant K (skin.h: H(s) = exp(-K l sqrt(s)), K in s^0.5 per
 * metre) from either of two forms:
 *   K itself          "4e-7", "4e-7 s^0.5/m" (also "s^(1/2)/m", "sqrt(s)/m"; a bare number is
 *                     s^0.5/m; white space inside the unit is ignored)
 *   a datasheet value "6.6 dB/100m@100MHz", "6.6 dB/100 m at 100 MHz", "2.0 dB/100ft@10MHz",
 *                     "66 dB/km at 100 MHz", "0.2 dB/m @ 1 GHz", "0.0076 Np/m @ 100 MHz":
 *                     an attenuation in dB (or Np) per a length (any se_unit_parse length, an
 *                     optional count before it: "/100 m", "/100ft", "/km", "/m"; "per" may
 *                     replace "/"), then "@" or " at " and the frequency it holds at (Hz,
 *                     kHz, MHz, GHz; the unit is required).
 * The datasheet form is converted with |H(j 2 pi f)| = exp(-K l sqrt(pi f)) (sqrt(j w) has real
 * part sqrt(w / 2)): alpha(f) = K sqrt(pi f) Np/m, so
 *     K = alpha_dB_per_m / (SE_DB_PER_NEPER sqrt(pi f)).
 * This takes ALL of the cable's loss at f for skin-effect (conductor) loss. Dielectric loss
 * (growing as f, not sqrt(f)) is not modelled: a figure quoted at a high frequency where it
 * dominates over-states K. Quote the datasheet value at the lowest listed frequency near the
 * pulse's band.
 *   text         : the value; leading and trailing white space ignored. NUL-terminated.
 *   k_s05_per_m  : [out] K, s^0.5/m, 0 <= K <= SE_SKIN_LOSS_MAX; untouched on failure.
 *   err          : [out, may be NULL] one line naming the text and what is wrong.
 * Returns SE_OK; SE_ERR_ARG for NULL or empty text, not a number, a non-finite number, or a
 * datasheet value without its length or its frequency ("missing frequency"); SE_ERR_UNIT for an
 * unknown unit (of the value, the length or the frequency), a missing length or frequency unit,
 * or text after the frequency; SE_ERR_RANGE for a negative value, a zero length or frequency, or a
 * K above SE_SKIN_LOSS_MAX (or one that overflows). */
se_status se_skin_loss_parse(const char *text, double *k_s05_per_m, se_error *err);

/* K from a datasheet attenuation: db_per_length dB over length_m metres at freq_hz.
 *   db_per_length >= 0 and finite; length_m > 0; freq_hz > 0.
 *   k_s05_per_m   : [out] K, s^0.5/m (no upper bound here); untouched on failure.
 * Returns SE_OK or SE_ERR_RANGE (naming the value). */
se_status se_skin_loss_from_attenuation(double db_per_length, double length_m, double freq_hz,
                                        double *k_s05_per_m, se_error *err);

/* The inverse, for printing: attenuation in dB of length_m metres of cable with K at freq_hz,
 * SE_DB_PER_NEPER K length_m sqrt(pi freq_hz). NAN for a negative or non-finite argument. */
double se_skin_loss_attenuation_db(double k_s05_per_m, double length_m, double freq_hz);

#ifdef __cplusplus
}
#endif

#endif /* SE_UNITS_H */
