/* io_internal.h: helpers shared by the file readers and writers of
 * src/lib/io, not part of the public interface. */
#ifndef TWF_IO_INTERNAL_H
#define TWF_IO_INTERNAL_H

#include "internal.h"

#include <locale.h>
#include <stddef.h>

/* Grow *p (of *cap elements of size sz) to hold at least need elements,
 * doubling so that appending n elements costs O(n). Returns 0, or -1 when
 * out of memory (*p and *cap unchanged). */
int twf_io_grow(void **p, size_t *cap, size_t need, size_t sz);

/* Append formatted text to buf (size n, NUL-terminated), never
 * overflowing: messages that list names are cut rather than lost. */
void twf_io_appendf(char *buf, size_t n, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Whether the mantissa of a number's text (decimal or C hexadecimal) has
 * a digit other than 0: strtod then returning 0 with ERANGE is an
 * underflow, which the readers refuse as they refuse overflow. */
int twf_io_mantissa_nonzero(const char *s);

/* Accepted deviation of a quaternion's norm from 1, for every reader
 * (model file, base pose file, campaign): exports with 7 significant
 * digits stay within it; anything beyond is a wrong column or a rotation
 * that is not one, and silently normalising would hide that. Documented
 * in twistfit-model(5) and twistfit-campaign(5). */
#define TWF_IO_QUAT_NORM_TOL 1e-6

/* The norm of q, and whether it is within TWF_IO_QUAT_NORM_TOL of 1 (a
 * NaN norm is not). */
int twf_io_quat_is_unit(const double q[4], double *norm);
/* The one message for a quaternion that is not unit: "WHAT has norm N,
 * not 1 within TOL" into buf (size n). Returns buf. */
const char *twf_io_quat_norm_message(char *buf, size_t n, const char *what, double norm);
/* The hint "give a unit quaternion w x y z (norm within TOL of 1)" plus
 * an optional tail ("", or "; " and more advice) into buf. Returns buf. */
const char *twf_io_quat_norm_hint(char *buf, size_t n, const char *tail);

/* Numbers in files are read and written in the "C" locale whatever the
 * caller's: the file formats define '.' as the decimal point, and strtod
 * and printf follow LC_NUMERIC (C11 7.22.1.3, 7.21.6.1), so a program that
 * called setlocale(LC_ALL, "") under a decimal-comma locale would
 * otherwise refuse "0.5" and write "0,5". Every reader and writer entry
 * point brackets its work with enter and leave: uselocale switches the
 * calling thread only, and leave gives it back the locale it had (its own
 * or the global one), so no other thread and no global state sees a
 * change. Names, units and error messages are then locale-independent
 * too (isalnum, strcasecmp, "%g"). */
typedef struct twf_io_c_locale {
  locale_t c;      /* the "C" locale object, (locale_t)0 when not entered */
  locale_t saved;  /* the thread's locale before enter */
} twf_io_c_locale;

/* Switch the calling thread to the "C" locale. TWF_ERR_NOMEM (err filled)
 * when the locale object cannot be made; then nothing was switched and
 * leave is a no-op. */
twf_status twf_io_c_locale_enter(twf_io_c_locale *l, twf_error *err);
/* Give the thread back its locale; safe after a failed enter. */
void twf_io_c_locale_leave(twf_io_c_locale *l);

#endif
