/* export_urdf.c: `twistfit export MODEL --as urdf [--like FILE]`: the
 * model as a URDF robot (twf_model_write_urdf), or written into a copy of
 * the user's URDF file (twf_model_write_urdf_like). */
#include "config.h"
#include "export_urdf.h"

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

int cli_export_urdf(const twf_model *m, const char *like, const char *base_link,
                    const char *tip_link, const char *output, int force,
                    const char *const *inputs)
{
  urdf_ctx x;
  cli_put put;
  x.model = m;
  x.like = like;
  x.ropt = twf_urdf_default_read_options();
  x.ropt.base_link = base_link;
  x.ropt.tip_link = tip_link;
  /* The writers check everything before the first byte: a refused model
   * leaves standard output empty and the output set unwritten. */
  put.path = output != NULL ? output : "-";
  put.put = put_urdf;
  put.ctx = &x;
  return cli_write_outputs(&put, 1, force, inputs);
}
