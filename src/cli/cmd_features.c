/* git omen features: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_features(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'features' is not built yet\n");
	return EXIT_FATAL;
}
