/* batch_internal.h - pieces shared by the files of the batch module (not
 * public). */
#ifndef LAMINA_BATCH_INTERNAL_H
#define LAMINA_BATCH_INTERNAL_H

#include "lamina/batch.h"

/* "fnv1a64:<16 hex>" of a text. */
void lam__batch_hash_text(const char *text, char out[LAM_BATCH_HASH_LEN]);

#endif
