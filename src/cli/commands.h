/* strandecho CLI: the subcommands, one file each. Each returns a process exit code. */
#ifndef SE_COMMANDS_H
#define SE_COMMANDS_H

int se_cmd_locate(int argc, char **argv);
int se_cmd_simulate(int argc, char **argv);
int se_cmd_survey(int argc, char **argv);
int se_cmd_compare(int argc, char **argv);
int se_cmd_speed(int argc, char **argv);
int se_cmd_calibrate(int argc, char **argv);
int se_cmd_plan(int argc, char **argv);

#endif /* SE_COMMANDS_H */
