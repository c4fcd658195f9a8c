/* io_internal.h: helpers shared by the file readers and writers of
 * src/lib/io, not part of the public interface. */
#ifndef TWF_IO_INTERNAL_H
#define TWF_IO_INTERNAL_H

#include "internal.h"

#include <stddef.h>

/* Grow *p (of *cap elements of size sz) to hold at least need elements,
 * doubling so that appending n elements costs O(n). Returns 0, or -1 when
 * out of memory (*p and *cap unchanged). */
int twf_io_grow(void **p, size_t *cap, size_t need, size_t sz);

/* Append formatted text to buf (size n, NUL-terminated), never
 * overflowing: messages that list names are cut rather than lost. */
void twf_io_appendf(char *buf, size_t n, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

#endif
