/* export_sheet.h: `twistfit export --as sheet|sheet-csv` (export_sheet.c). */
#ifndef TWISTFIT_EXPORT_SHEET_H
#define TWISTFIT_EXPORT_SHEET_H

#include "cli.h"

/* Parse an --euler value (rpy, zyx, zyz); prints a usage error and
 * returns an exit status when it is none of them, else 0. */
int cli_sheet_parse_euler(const char *arg, twf_euler_convention *out);

/* The parameter sheet of m (read from source) as text (csv = 0) or CSV,
 * poses in Euler convention eu; base_path (may be NULL) a base pose file,
 * the base frame in the instrument frame. Writes to output (NULL or "-":
 * standard output) through the output set; inputs as cli_write_outputs.
 * Returns an exit status. */
/* like: NULL, or a model whose conventions (link forms, signs of the DH
 * x axes) the sheet follows (export --like). */
int cli_export_sheet(const twf_model *m, const char *source, int csv, twf_euler_convention eu,
                     const char *base_path, const twf_model *like, const char *output,
                     int force, const char *const *inputs);

#endif
