/* Where the label file is: the one rule every stage (label, train, eval,
 * features, score, explain) follows. It sits in src/label/, beside the label
 * file's reader and writer, and reads the setting through history/'s config
 * reader. */
#include <stdlib.h>
#include "omen/error.h"
#include "omen/history.h"
#include "omen/label.h"

int omen_labels_path(char **out, omen_repo *r, int *configured)
{
	char *v = NULL;
	int e;
	*out = NULL;
	if (configured)
		*configured = 0;
	if ((e = omen_config_string(&v, r, "omen.labels")))
		return e;
	if (v && *v) {
		*out = v;
		if (configured)
			*configured = 1;
		return 0;
	}
	free(v);
	return omen_repo_omen_path(out, r, "labels.jsonl");
}
