/* Internal to src/label/: label file writing helpers. */
#ifndef OMEN_LABEL_INTERNAL_H
#define OMEN_LABEL_INTERNAL_H

#include "omen/label.h"

/* Appends one commit's JSON line (with '\n'). */
int lbl_write_record(omen_buf *b, const omen_label_rec *r);
/* The header line of a loaded label file (raw JSON). */
const char *lbl_labels_header(const omen_labels *l);

#endif
