/* git omen hook: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_hook(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'hook' is not built yet\n");
	return EXIT_FATAL;
}
