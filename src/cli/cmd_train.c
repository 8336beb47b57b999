/* git omen train: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_train(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'train' is not built yet\n");
	return EXIT_FATAL;
}
