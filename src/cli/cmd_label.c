/* git omen label: placeholder until the command lands; replace this file. */
#include "cli/cli.h"

int cmd_label(int argc, char **argv)
{
	(void)argc; (void)argv;
	fprintf(stderr, "git omen: 'label' is not built yet\n");
	return EXIT_FATAL;
}
