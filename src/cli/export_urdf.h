/* export_urdf.h: `twistfit export --as urdf` (export_urdf.c), kept out of
 * cmd_export.c so that each format's code stays in one place. */
#ifndef TWF_CLI_EXPORT_URDF_H
#define TWF_CLI_EXPORT_URDF_H

#include "cli.h"

/* Write m as a URDF robot to output ("-" or NULL: standard output), or
 * into a copy of like (may be NULL) with the chain chosen by base_link and
 * tip_link (may be NULL). Returns an exit status; errors printed. */
int cli_export_urdf(const twf_model *m, const char *like, const char *base_link,
                    const char *tip_link, const char *output, int force,
                    const char *const *inputs);

#endif
