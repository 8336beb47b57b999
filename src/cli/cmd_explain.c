/* git omen explain: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_explain(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'explain' is not built yet\n");
	return EXIT_FATAL;
}
