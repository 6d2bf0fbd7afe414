/* The subcommands; each returns the process exit status. */
#ifndef DT_COMMANDS_H
#define DT_COMMANDS_H
int cmd_info(int argc, char **argv);
int cmd_fit(int argc, char **argv);
int cmd_merge(int argc, char **argv);
int cmd_demo(int argc, char **argv);
int cmd_inspect(int argc, char **argv);
int cmd_keys(int argc, char **argv);
int cmd_log(int argc, char **argv);
int cmd_export(int argc, char **argv);
int cmd_compare(int argc, char **argv);
int cmd_fraction(int argc, char **argv);
int cmd_vsf(int argc, char **argv);
int cmd_map(int argc, char **argv);
int cmd_figure(int argc, char **argv);
int cmd_hi(int argc, char **argv);
#endif
