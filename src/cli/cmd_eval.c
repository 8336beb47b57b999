/* git omen eval: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_eval(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'eval' is not built yet\n");
	return EXIT_FATAL;
}
