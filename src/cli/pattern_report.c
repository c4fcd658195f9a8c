/* calibrate's section and JSON member on whether the residuals look like
 * noise (the library's twf_pattern_result, formatted only). */
#include "config.h"
#include "cli.h"

#include <math.h>
#include <stdio.h>

static const char *skip_words(twf_pattern_skip s)
{
  switch (s) {
  case TWF_PATTERN_TESTED: return "tested";
  case TWF_PATTERN_NOT_APPLICABLE: return "n/a";
  case TWF_PATTERN_FITTED: return "fitted";
  case TWF_PATTERN_NO_TORQUE: return "no mass model";
  case TWF_PATTERN_TOO_FEW: return "too few rows";
  case TWF_PATTERN_DEGENERATE: return "no variation";
  }
  return "?";
}

static const char *skip_name(twf_pattern_skip s)
{
  switch (s) {
  case TWF_PATTERN_TESTED: return "tested";
  case TWF_PATTERN_NOT_APPLICABLE: return "not applicable";
  case TWF_PATTERN_FITTED: return "fitted";
  case TWF_PATTERN_NO_TORQUE: return "no torques";
  case TWF_PATTERN_TOO_FEW: return "too few";
  case TWF_PATTERN_DEGENERATE: return "degenerate";
  }
  return "?";
}

void cli_print_pattern(FILE *fp, const twf_model *m, const twf_pattern_result *p, size_t screen_refused,
                       const cli_units *u)
{
  size_t j, k;
  fprintf(fp, "\nDo the residuals look like noise?\n");
  fprintf(fp, "  per joint, the part of the residuals that follows its value (slope), its angle's\n"
              "  first two harmonics, or its gravity torque, given every other joint's: F test over\n"
              "  %zu measurements, significant below p = %.2g (alpha %.2g over %zu families) and from\n"
              "  %.0f %% of the residual sum of squares and %.2g %s RMS; residual RMS %.*f %s\n",
          p->n_used, p->p_threshold, p->alpha, p->n_tested, 100.0 * p->min_explained,
          p->min_explained_rms_m / u->length_si, u->length, u->ldec,
          p->n_tests > 0 && isfinite(p->tests[0].residual_rms_m) ? p->tests[0].residual_rms_m / u->length_si : NAN,
          u->length);
  fprintf(fp, "    %-8s", "joint");
  for (k = 0; k < TWF_PATTERN_NKINDS; k++)
    fprintf(fp, " %22s", twf_pattern_kind_name((twf_pattern_kind)k));
  fprintf(fp, "\n    %-8s", "");
  for (k = 0; k < TWF_PATTERN_NKINDS; k++)
    fprintf(fp, " %22s", "p, share of SS");
  fputc('\n', fp);
  for (j = 0; j < m->n_joints; j++) {
    fprintf(fp, "    %-8s", m->joints[j].name);
    for (k = 0; k < TWF_PATTERN_NKINDS; k++) {
      const twf_pattern_test *t = &p->tests[j * TWF_PATTERN_NKINDS + k];
      char cell[64];
      if (t->skip != TWF_PATTERN_TESTED)
        snprintf(cell, sizeof cell, "%s", skip_words(t->skip));
      else
        snprintf(cell, sizeof cell, "%s%.1e, %5.1f %%", t->significant ? "* " : "", t->p_value,
                 100.0 * t->explained);
      fprintf(fp, " %22s", cell);
    }
    fputc('\n', fp);
  }
  if (p->n_significant == 0)
    fprintf(fp, "  nothing systematic found: the residuals are consistent with measurement noise\n");
  else
    fprintf(fp, "  %zu %s marked * (see the warnings): the model lacks an effect; the noise estimate\n"
                "  and the standard deviations above are then too optimistic\n",
            p->n_significant, cli_plural(p->n_significant, "pattern", "patterns"));
  if (screen_refused > 0)
    fprintf(fp, "  the outlier screen would have dropped %zu fit %s; they were kept (see the warnings)\n",
            screen_refused, cli_plural(screen_refused, "measurement", "measurements"));
}

json_t *cli_json_pattern(const twf_model *m, const twf_pattern_result *p, size_t screen_refused,
                         const cli_units *u)
{
  json_t *o = json_object(), *tests = json_array();
  size_t i;
  json_object_set_new(o, "measurements", json_integer((json_int_t)p->n_used));
  json_object_set_new(o, "alpha", cli_json_number(p->alpha));
  json_object_set_new(o, "min_explained", cli_json_number(p->min_explained));
  json_object_set_new(o, "min_explained_rms", cli_json_number(p->min_explained_rms_m / u->length_si));
  json_object_set_new(o, "p_threshold", cli_json_number(p->p_threshold));
  json_object_set_new(o, "tested", json_integer((json_int_t)p->n_tested));
  json_object_set_new(o, "significant", json_integer((json_int_t)p->n_significant));
  json_object_set_new(o, "screen_refused", json_integer((json_int_t)screen_refused));
  for (i = 0; i < p->n_tests; i++) {
    const twf_pattern_test *t = &p->tests[i];
    json_t *e = json_object();
    json_object_set_new(e, "joint", json_string(m->joints[t->joint].name));
    json_object_set_new(e, "family", json_string(twf_pattern_kind_name(t->kind)));
    json_object_set_new(e, "status", json_string(skip_name(t->skip)));
    if (t->skip == TWF_PATTERN_TESTED) {
      json_object_set_new(e, "dof", json_integer((json_int_t)t->k));
      json_object_set_new(e, "f", cli_json_number(t->f));
      json_object_set_new(e, "p", cli_json_number(t->p_value));
      json_object_set_new(e, "share", cli_json_number(t->explained));
      json_object_set_new(e, "explained_rms", cli_json_number(t->explained_rms_m / u->length_si));
      json_object_set_new(e, "significant", json_boolean(t->significant));
    }
    json_array_append_new(tests, e);
  }
  json_object_set_new(o, "tests", tests);
  return o;
}
