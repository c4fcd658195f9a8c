/* urdf_cli.h: the command line's URDF pieces (urdf_cli.c): `twistfit
 * export --as urdf`, kept out of cmd_export.c so that each format's code
 * stays in one place, and the options that choose a URDF file's chain. */
#ifndef TWF_CLI_URDF_H
#define TWF_CLI_URDF_H

#include "cli.h"

/* Write m as a URDF robot to output ("-" or NULL: standard output), or
 * into a copy of like (may be NULL) with the chain chosen by ropt's URDF
 * fields. Returns an exit status; errors printed. */
int cli_export_urdf(const twf_model *m, const char *like, const twf_read_options *ropt,
                    const char *output, int force, const char *const *inputs);

/* Handle one of the three options (name without dashes) into ropt; the
 * target names are kept in links, which must outlive ropt's use. Returns
 * 0 or a usage error's exit status. (cli_urdf_longopt in cli.h takes the
 * option's number instead.) */
int cli_urdf_option(const char *command, const char *name, const char *value,
                    cli_urdf_links *links, twf_read_options *ropt);

#endif
