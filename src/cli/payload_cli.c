/* payload_cli.c: the --payload NAME option of the commands that evaluate
 * a model with compliances (fk, verify, calibrate, compare, compensate):
 * the load the arm carries at rows whose file names none. */
#include "config.h"
#include "cli.h"

#include <stdio.h>
#include <string.h>

int cli_payload_resolve(const char *command, const twf_model *m, const char *name, long *index)
{
  char list[512];
  size_t k, used = 0;
  *index = -1;
  if (name == NULL)
    return TWF_EXIT_OK;
  *index = twf_model_payload_index(m, name);
  if (*index >= 0)
    return TWF_EXIT_OK;
  list[0] = '\0';
  for (k = 0; k < m->n_payloads && used + 1 < sizeof list; k++) {
    int w = snprintf(list + used, sizeof list - used, "%s%s", k ? ", " : "", m->payloads[k].name);
    if (w < 0)
      break;
    used += (size_t)w;
  }
  fprintf(stderr, "twistfit: error: --payload '%s': the model declares %s%s\n", name,
          m->n_payloads ? "the payloads " : "no payloads", list);
  fprintf(stderr, "twistfit: hint: declare the load as [payload %s] with mass and center in the model "
                  "file, see twistfit-model(5); run 'twistfit help %s'\n", name, command);
  return TWF_EXIT_USAGE;
}

int cli_payload_apply(const char *command, twf_campaign *c, const char *path, long index)
{
  size_t k;
  if (index < 0 || c == NULL)
    return TWF_EXIT_OK;
  if (c->pose_payload != NULL) {
    fprintf(stderr, "twistfit: error: %s names the payload of each pose (column 'payload'): "
                    "--payload would contradict it\n", path);
    fprintf(stderr, "twistfit: hint: leave out --payload, or drop the file's payload column; run "
                    "'twistfit help %s'\n", command);
    return TWF_EXIT_USAGE;
  }
  if (twf_campaign_payload_alloc(c) != TWF_OK)
    return cli_out_of_memory();
  for (k = 0; k < c->n_poses; k++)
    c->pose_payload[k] = index;
  return TWF_EXIT_OK;
}
