/* strandecho CLI: shared option handling, messages and exit codes. No algorithms here. */
#ifndef SE_CLI_H
#define SE_CLI_H

#include <stddef.h>
#include <stdio.h>

#include "strandecho/error.h"
#include "strandecho/wave.h"

/* Exit codes (documented in --help, README and the man page). */
enum {
    SE_EXIT_OK = 0,       /* success */
    SE_EXIT_INTERNAL = 1, /* unexpected internal failure */
    SE_EXIT_USAGE = 2,    /* bad command line: unknown option, missing or invalid value */
    SE_EXIT_INPUT = 3,    /* an input file cannot be read or is malformed */
    SE_EXIT_DATA = 4,     /* the data cannot give a result (no pulse, too short, NaN...) */
    SE_EXIT_OUTPUT = 5,   /* an output cannot be written */
    SE_EXIT_MEMORY = 6    /* out of memory or over the memory limit */
};

typedef struct se_cli {
    int argc;
    char **argv;
    int i;          /* next argument */
    int quiet;      /* --quiet */
    int verbose;    /* --verbose */
} se_cli;

/* Print "strandecho: error: ..." on one line to stderr; returns code. */
int se_cli_fail(int code, const char *fmt, ...)
#if defined(__GNUC__) || defined(__clang__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
/* Print the library error on one line and map its status to an exit code. */
int se_cli_fail_err(const se_error *err, int io_is_output);
/* Map a status to an exit code (SE_ERR_IO counts as input unless io_is_output). */
int se_cli_exit_code(se_status st, int io_is_output);

/* If argv[i] is --name or --name=VALUE, take the value (from the next argument when separate),
 * advance, and return 1; return 0 when it is another option; -1 (message printed) when the value
 * is missing. */
int se_cli_value(se_cli *c, const char *name, const char **value);
/* Inside a command's option loop (a se_cli c and an int got in scope): take a string option's
 * value into var and continue the loop; return SE_EXIT_USAGE when its value is missing. */
#define SE_TAKE(name, var)                                                                        \
    if ((got = se_cli_value(&c, name, &(var))) != 0) {                                            \
        if (got < 0)                                                                              \
            return SE_EXIT_USAGE;                                                                 \
        continue;                                                                                 \
    }

/* The same for a whole-number option in [min, max] (an unsigned long var; a char *v in scope). */
#define SE_TAKE_UINT(name, min, max, var)                                                         \
    if ((got = se_cli_value(&c, name, &v)) != 0) {                                                \
        if (got < 0 || se_cli_uint(name, v, min, max, &(var)) != 0)                               \
            return SE_EXIT_USAGE;                                                                 \
        continue;                                                                                 \
    }

/* --false-alarms N: the expected false detections per record, a number in (0, 1000], as every
 * command that detects takes it; a bad value is refused with its one-line error. */
#define SE_TAKE_FALSE_ALARMS(var)                                                                 \
    if ((got = se_cli_value(&c, "--false-alarms", &v)) != 0) {                                    \
        if (got < 0 || se_cli_false_alarms(v, &(var)) != 0)                                       \
            return SE_EXIT_USAGE;                                                                 \
        continue;                                                                                 \
    }

/* Parse a --false-alarms value in (0, 1000] (prints the error and returns -1 when it is not). */
int se_cli_false_alarms(const char *text, double *out);

/* If argv[i] is exactly --name (a flag), advance and return 1. */
int se_cli_flag(se_cli *c, const char *name);
/* Parse a positive integer option value (1-based channel numbers etc.). */
int se_cli_uint(const char *opt, const char *text, unsigned long min, unsigned long max,
                unsigned long *out);

/* Wave-speed options shared by locate, simulate and calibrate. */
typedef struct se_speed_opts {
    const char *speed;            /* --speed */
    const char *velocity_factor;  /* --velocity-factor */
    const char *tension;          /* --tension */
    const char *mass_per_length;  /* --mass-per-length */
    const char *axial_stiffness;  /* --axial-stiffness */
    const char *uncertainty;      /* --speed-uncertainty */
} se_speed_opts;

/* Take one of the speed options at c->i; 1 taken, 0 not a speed option, -1 error printed. */
int se_cli_speed_option(se_cli *c, se_speed_opts *o);

typedef struct se_speed {
    double speed_m_s;
    double uncertainty;  /* fraction */
    double tension_n, mass_per_length_kg_m, axial_stiffness_n, velocity_factor; /* NaN unused */
    char source[160];    /* how it was obtained, SI values printed back */
    int electrical_hint; /* 1 when given as a velocity factor */
} se_speed;

/* Resolve the speed options; returns SE_EXIT_OK or an exit code (message printed). required=0
 * allows no speed at all (speed_m_s = 0). */
int se_cli_speed_resolve(const se_speed_opts *o, int required, se_speed *out);

/* Write a JSON document (two-space indent, trailing newline) to path ("-" = standard output)
 * through se_output, complete or not at all; returns an exit code (message printed). */
struct json_t;
int se_cli_write_json(const char *path, struct json_t *root);

/* Check that an output path is not one of the inputs (NULL-terminated list). */
int se_cli_check_output(const char *out, const char *const *inputs);

#endif /* SE_CLI_H */
