/* campaign_ids.c: pose ids of a campaign being read: a hash from id to
 * index, and the short lists of ids that error messages give. */
#include "campaign_internal.h"

#include <stdint.h>
#include <stdlib.h>

static size_t str_hash(const char *s)
{
  uint64_t h = 1469598103934665603ULL;
  for (; *s; s++) {
    h ^= (unsigned char)*s;
    h *= 1099511628211ULL;
  }
  return (size_t)h;
}

size_t twf_idmap_find(const twf_idmap *h, char (*names)[TWF_NAME_MAX],
                         const char *s)
{
  size_t i;
  if (h->cap == 0)
    return NONE;
  for (i = str_hash(s) & (h->cap - 1); h->slot[i] != 0; i = (i + 1) & (h->cap - 1))
    if (strcmp(names[h->slot[i] - 1], s) == 0)
      return h->slot[i] - 1;
  return NONE;
}

static void idmap_place(twf_idmap *h, char (*names)[TWF_NAME_MAX], size_t index)
{
  size_t i = str_hash(names[index]) & (h->cap - 1);
  while (h->slot[i] != 0)
    i = (i + 1) & (h->cap - 1);
  h->slot[i] = index + 1;
}

/* Add names[index] (count = entries including it), keeping load <= 1/2. */
int twf_idmap_add(twf_idmap *h, char (*names)[TWF_NAME_MAX], size_t count,
                     size_t index)
{
  if (2 * count > h->cap) {
    size_t cap = h->cap ? 2 * h->cap : 64, k;
    size_t *slot;
    while (2 * count > cap)
      cap *= 2;
    slot = calloc(cap, sizeof *slot);
    if (slot == NULL)
      return -1;
    free(h->slot);
    h->slot = slot;
    h->cap = cap;
    for (k = 0; k < count; k++)
      if (k != index)
        idmap_place(h, names, k);
  }
  idmap_place(h, names, index);
  return 0;
}

void twf_creader_list_ids(char *buf, size_t n, char (*ids)[TWF_NAME_MAX],
                          const size_t *which, size_t count)
{
  size_t k;
  buf[0] = '\0';
  for (k = 0; k < count && k < LIST_IDS; k++)
    twf_io_appendf(buf, n, "%s'%s'", k ? ", " : "", ids[which ? which[k] : k]);
  if (count > LIST_IDS)
    twf_io_appendf(buf, n, " and %zu more", count - LIST_IDS);
}
