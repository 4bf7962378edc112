/* strandecho: the elastic catenary of a hanging line (H. M. Irvine, Cable Structures, MIT Press
 * 1981), with an optional length resting on the seabed (J. Jonkman, NREL/TP-500-41958, 2007).
 *
 * Coordinates: s is the unstretched arc length measured from the LOWER end of the line (the
 * anchor, or the free lower end of a line hanging from its top), 0 <= s <= L. The first L_B
 * metres lie on the seabed (tension H less seabed friction C_B w per metre towards the anchor);
 * the remaining suspended length L_s = L - L_B hangs as an elastic catenary with horizontal
 * tension H and vertical force V_A at its lower end (the touchdown point when L_B > 0):
 *   T(s') = sqrt(H^2 + (V_A + w s')^2)                          s' = s - L_B
 *   x(s') = (H/w)[asinh((V_A + w s')/H) - asinh(V_A/H)] + H s'/EA
 *   z(s') = (H/w)[sqrt(1 + ((V_A + w s')/H)^2) - sqrt(1 + (V_A/H)^2)] + (V_A s' + w s'^2/2)/EA
 * With H = 0 the line hangs vertically: T = V_A + w s', x = 0, z = s' + (V_A s' + w s'^2/2)/EA.
 *
 * A solved catenary is immutable and may be shared between threads. */
#ifndef SE_CATENARY_H
#define SE_CATENARY_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* What is known about a hanging line. Unknown values are NAN (use se_catenary_config_init).
 * Accepted combinations (anything else is SE_ERR_ARG):
 *   - horizontal_tension_n and top_tension_n: V_A follows from T_top^2 = H^2 + (V_A + w L_s)^2;
 *   - one of them with lower_vertical_n (V_A, default 0: touchdown or a free lower end);
 *   - depth_m with one of them: V_A = 0 at touchdown, the seabed length L_B is solved (Brent)
 *     so that the suspended part rises exactly depth_m; seabed_length_m must then be NAN. */
typedef struct se_catenary_config {
    double length_m;             /* total unstretched length L (m), > 0 */
    double weight_n_m;           /* submerged weight per unstretched length w (N/m), > 0 */
    double ea_n;                 /* axial stiffness EA (N) for stretch; NAN or INFINITY = inextensible */
    double horizontal_tension_n; /* H (N), >= 0, or NAN */
    double top_tension_n;        /* tension at the top end (N), > 0, or NAN */
    double lower_vertical_n;     /* V_A (N), >= 0, or NAN (then 0 unless both tensions are given) */
    double seabed_length_m;      /* L_B (m) resting on the seabed, 0 <= L_B < L, or NAN (= 0, or solved from depth_m) */
    double depth_m;              /* vertical rise of the suspended part (m), > 0, or NAN */
    double seabed_friction;      /* C_B (dimensionless), >= 0; tension falls by C_B w per metre towards the anchor */
} se_catenary_config;

/* Solved catenary (opaque). */
typedef struct se_catenary se_catenary;

/* Summary of a solved catenary. */
typedef struct se_catenary_info {
    double length_m;             /* total unstretched length L (m) */
    double suspended_length_m;   /* L_s (m) */
    double seabed_length_m;      /* L_B (m) */
    double weight_n_m;           /* w (N/m) */
    double horizontal_tension_n; /* H (N) */
    double lower_vertical_n;     /* V_A (N) at the lower end of the suspended part */
    double top_tension_n;        /* T at s = L (N) */
    double anchor_tension_n;     /* T at s = 0 (N), after seabed friction */
    double span_m;               /* horizontal distance from s = 0 to s = L (m), stretch included */
    double depth_m;              /* vertical rise from s = 0 to s = L (m), stretch included */
} se_catenary_info;

/* Fill a config with NAN unknowns, EA inextensible, friction 0. */
void se_catenary_config_init(se_catenary_config *cfg);

/* Solve the catenary. Returns NULL and fills err on bad or inconsistent input (e.g. a top tension
 * smaller than the suspended weight, seabed friction that leaves part of the line slack).
 * Free with se_catenary_destroy. */
se_catenary *se_catenary_create(const se_catenary_config *cfg, se_error *err);

/* Free (NULL accepted). */
void se_catenary_destroy(se_catenary *c);

/* Summary of the solution. */
void se_catenary_get_info(const se_catenary *c, se_catenary_info *info);

/* Tension T(s) (N) at arc length s (m) from the lower end, s clamped to [0, L]. */
double se_catenary_tension(const se_catenary *c, double s);

/* Position of arc length s (m): x horizontal (m) and z vertical (m, up) from the point s = 0.
 * On the seabed z = 0 and x = s + H s / EA (friction's effect on stretch ignored). */
void se_catenary_position(const se_catenary *c, double s, double *x, double *z);

/* One-way transverse travel time (s) between arc lengths s0 < s1 (m) for a line of effective
 * mass per length mu_eff (kg/m): integral of sqrt(mu_eff / T(s)) ds, by GSL qags over the
 * substitution u = sqrt(s' - a) on the suspended part (removes the 1/sqrt singularity at a free
 * hanging end where T -> 0) and in closed form on the seabed. SE_ERR_RANGE if T = 0 on a
 * stretch of finite length inside [s0, s1]; SE_ERR_NUMERIC if the integration fails. */
se_status se_catenary_transverse_time(const se_catenary *c, double mu_eff_kg_m, double s0, double s1,
                                      double *time_s, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_CATENARY_H */
