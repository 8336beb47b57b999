/* git omen score: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_score(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'score' is not built yet\n");
	return EXIT_FATAL;
}
