/* The spume commands: each parses its own arguments (argv excludes the command name) and returns
 * the exit status (0 ok, 2 bad usage or input, 1 internal failure). */
#ifndef SP_CLI_COMMANDS_H
#define SP_CLI_COMMANDS_H

int cmd_measure(int argc, char **argv);
int cmd_synth(int argc, char **argv);
int cmd_listen(int argc, char **argv);
int cmd_calibrate(int argc, char **argv);
int cmd_crosscheck(int argc, char **argv);
int cmd_report(int argc, char **argv);
/* `spume synth target`: renders a calibration target (argv after "target"). */
int cmd_synth_target(int argc, char **argv);

#endif
