/* numlocale.c: the "C" locale around every read and write of a file, so
 * that the caller's LC_NUMERIC cannot change what a number means (see
 * io_internal.h). */
#include "io_internal.h"

twf_status twf_io_c_locale_enter(twf_io_c_locale *l, twf_error *err)
{
  l->saved = (locale_t)0;
  l->c = newlocale(LC_ALL_MASK, "C", (locale_t)0);
  if (l->c == (locale_t)0)
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "out of memory making the C locale for numbers");
  l->saved = uselocale(l->c);
  if (l->saved == (locale_t)0) {
    freelocale(l->c);
    l->c = (locale_t)0;
    return twf_error_set(err, TWF_ERR_NOMEM, NULL, 0, 0, NULL,
                         "cannot switch to the C locale for numbers");
  }
  return TWF_OK;
}

void twf_io_c_locale_leave(twf_io_c_locale *l)
{
  if (l->c == (locale_t)0)
    return;
  /* saved may be LC_GLOBAL_LOCALE: uselocale takes it back as such. */
  uselocale(l->saved);
  freelocale(l->c);
  l->c = (locale_t)0;
}
