/* strandecho command-line tool: subcommand dispatch. */
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "cli.h"
#include "commands.h"

static const char se_main_usage[] =
    "usage: strandecho COMMAND [options]\n"
    "\n"
    "Find and classify faults on long lines (tethers, mooring legs, guy wires, ropes, cables) from\n"
    "a recording of a pulse injected at one end.\n"
    "\n"
    "commands:\n"
    "  locate     locate and classify the reflections in a recording\n"
    "  simulate   make a recording of a modelled line (demo, tests, planning)\n"
    "  survey     every line of a survey file: summary, combined report, JSON Lines\n"
    "  compare    what changed since a baseline recording (new, gone, moved, changed)\n"
    "  speed      per-segment speeds, impedances, travel times and expected reflections\n"
    "  calibrate  solve the wave speed from an echo at a known distance\n"
    "  plan       pulse, sample rate, record length and stacking for a survey of a line\n"
    "  version    print the version\n"
    "\n"
    "`strandecho COMMAND --help` describes each command.\n"
    "\n"
    "exit codes: 0 success; 1 internal failure; 2 bad command line or option value; 3 input file\n"
    "unreadable or malformed; 4 data cannot give a result (no pulse, too short, NaN...); 5 output\n"
    "cannot be written; 6 out of memory or over the memory limit.\n";

int main(int argc, char **argv)
{
    gsl_set_error_handler_off();
    if (argc < 2) {
        fputs(se_main_usage, stderr);
        return SE_EXIT_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        fputs(se_main_usage, stdout);
        return SE_EXIT_OK;
    }
    if (strcmp(argv[1], "version") == 0 || strcmp(argv[1], "--version") == 0) {
        printf("strandecho %s\n", se_version());
        return SE_EXIT_OK;
    }
    if (strcmp(argv[1], "locate") == 0)
        return se_cmd_locate(argc - 1, argv + 1);
    if (strcmp(argv[1], "simulate") == 0)
        return se_cmd_simulate(argc - 1, argv + 1);
    if (strcmp(argv[1], "survey") == 0)
        return se_cmd_survey(argc - 1, argv + 1);
    if (strcmp(argv[1], "compare") == 0)
        return se_cmd_compare(argc - 1, argv + 1);
    if (strcmp(argv[1], "speed") == 0)
        return se_cmd_speed(argc - 1, argv + 1);
    if (strcmp(argv[1], "calibrate") == 0)
        return se_cmd_calibrate(argc - 1, argv + 1);
    if (strcmp(argv[1], "plan") == 0)
        return se_cmd_plan(argc - 1, argv + 1);
    return se_cli_fail(SE_EXIT_USAGE, "unknown command '%s' (see strandecho --help)", argv[1]);
}
