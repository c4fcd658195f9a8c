/* history.c: the as-built record of a model file keeps its history. A
 * calibration started from an as-built model adds its own record; the
 * earlier ones stay, each under a numbered prefix, so that the file tells
 * how the model came about. */
#include "internal.h"

#include <stdio.h>
#include <stdlib.h>

/* The record number of a key "recordN.rest" (N >= 1), else 0. */
static long record_number(const char *key)
{
  char *end;
  long n;
  if (strncmp(key, "record", 6) != 0 || key[6] < '1' || key[6] > '9')
    return 0;
  n = strtol(key + 6, &end, 10);
  return *end == '.' && n > 0 ? n : 0;
}

twf_status twf_asbuilt_record_push(twf_model *m, long *record_no, twf_error *err)
{
  long highest = 0, n;
  size_t i, moved = 0;
  if (m == NULL)
    return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, NULL, "no model");
  for (i = 0; i < m->n_meta; i++)
    if ((n = record_number(m->meta[i].key)) > highest)
      highest = n;
  /* check first, so that a key too long leaves the model as it was */
  for (i = 0; i < m->n_meta; i++) {
    char key[TWF_NAME_MAX + 32];
    if (record_number(m->meta[i].key) != 0)
      continue;
    if ((size_t)snprintf(key, sizeof key, "record%ld.%s", highest + 1, m->meta[i].key) >= TWF_NAME_MAX)
      return twf_error_set(err, TWF_ERR_INVALID, NULL, 0, 0, "shorten the metadata key",
                           "metadata key '%s' is too long to keep in the history", m->meta[i].key);
  }
  for (i = 0; i < m->n_meta; i++) {
    char key[TWF_NAME_MAX + 32];
    if (record_number(m->meta[i].key) != 0)
      continue;
    snprintf(key, sizeof key, "record%ld.%s", highest + 1, m->meta[i].key);
    memcpy(m->meta[i].key, key, strlen(key) + 1);
    moved++;
  }
  if (record_no != NULL)
    *record_no = moved ? highest + 1 : 0;
  return TWF_OK;
}
