/* urdf_cli.c: `twistfit export MODEL --as urdf [--like FILE]`: the
 * model as a URDF robot (twf_model_write_urdf), or written into a copy of
 * the user's URDF file (twf_model_write_urdf_like); the options that
 * choose the chain of a URDF input. */
#include "config.h"
#include "urdf_cli.h"

#include <string.h>

int cli_urdf_option(const char *command, const char *name, const char *value,
                    cli_urdf_links *links, twf_read_options *ropt)
{
  if (value[0] == '\0')
    return cli_usage_error(command, "--%s takes a link name", name);
  if (strcmp(name, "base-link") == 0) {
    ropt->urdf_base_link = value;
  } else if (strcmp(name, "tip-link") == 0) {
    ropt->urdf_tip_link = value;
  } else {
    if (links->n_targets == CLI_URDF_TARGETS_MAX)
      return cli_usage_error(command, "at most %d --target-link options", CLI_URDF_TARGETS_MAX);
    links->targets[links->n_targets++] = value;
    ropt->urdf_target_links = links->targets;
    ropt->urdf_n_target_links = links->n_targets;
  }
  return 0;
}

int cli_urdf_longopt(const char *command, int opt, const char *value, cli_urdf_links *links,
                     twf_read_options *ropt)
{
  return cli_urdf_option(command,
                         opt == CLI_OPT_BASE_LINK  ? "base-link"
                         : opt == CLI_OPT_TIP_LINK ? "tip-link"
                                                   : "target-link",
                         value, links, ropt);
}

typedef struct urdf_ctx {
  const twf_model *model;
  const char *like;
  twf_urdf_read_options ropt;
} urdf_ctx;

static int put_urdf(FILE *fp, void *ctx, twf_error *err)
{
  const urdf_ctx *x = ctx;
  twf_status st = x->like != NULL
                      ? twf_model_write_urdf_like(x->model, x->like, &x->ropt, fp, err)
                      : twf_model_write_urdf(x->model, NULL, fp, err);
  return st == TWF_OK ? 0 : -1;
}

int cli_export_urdf(const twf_model *m, const char *like, const twf_read_options *ropt,
                    const char *output, int force, const char *const *inputs)
{
  urdf_ctx x;
  cli_put put;
  x.model = m;
  x.like = like;
  x.ropt = twf_urdf_default_read_options();
  x.ropt.base_link = ropt->urdf_base_link;
  x.ropt.tip_link = ropt->urdf_tip_link;
  x.ropt.target_links = ropt->urdf_target_links;
  x.ropt.n_target_links = ropt->urdf_n_target_links;
  x.ropt.max_input_size = ropt->max_input_size;
  /* The writers check everything before the first byte: a refused model
   * leaves standard output empty and the output set unwritten. */
  put.path = output != NULL ? output : "-";
  put.put = put_urdf;
  put.ctx = &x;
  return cli_write_outputs(&put, 1, force, inputs);
}
