/* links_table.c: the link-parameter table (twistfit/links.h) as text and
 * JSON, shared by `compare` (two models, no standard deviations) and
 * `calibrate` (as-built against the starting model, with standard
 * deviations and what the fit left open). */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"

#include <math.h>
#include <string.h>

static int link_is_angle(int v)
{
  return v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA;
}

/* "base", the joint's name, or "flange": the line a row starts from. */
static const char *row_label(const twf_model *m, size_t r)
{
  if (r == 0)
    return "base";
  if (r <= m->n_joints)
    return m->joints[r - 1].name;
  return "flange";
}

/* A value in display units; angles in (-180, 180] degrees (or the unit's
 * equivalent), so that a half turn does not print as +180 on one platform
 * and -180 on another. */
static double shown(double si, int v, const cli_units *u)
{
  if (link_is_angle(v) && si <= -M_PI + 1e-12)
    si += 2.0 * M_PI;
  return si / (link_is_angle(v) ? u->angle_si : u->length_si);
}

static const char *note_of(const twf_link_row *row, int v)
{
  return row->why[v] == TWF_LINK_DETERMINED ? "" : twf_link_why_text(row->why[v]);
}

cli_links_table cli_links_table_of(const twf_links *l, const double *difference,
                                   const twf_model *model, const cli_units *units,
                                   const char *reference_label, const char *value_label,
                                   const char *reference_key, const char *value_key,
                                   int with_std)
{
  cli_links_table t;
  memset(&t, 0, sizeof t);
  t.links = l;
  t.difference = difference;
  t.model = model;
  t.units = units;
  t.reference_label = reference_label;
  t.value_label = value_label;
  t.reference_key = reference_key;
  t.value_key = value_key;
  t.with_std = with_std;
  return t;
}

void cli_links_print(FILE *fp, const cli_links_table *t)
{
  const twf_links *l = t->links;
  const cli_units *u = t->units;
  size_t r;
  int v;
  fprintf(fp, "  %4s %-8s %-5s %-6s %14s %14s %14s", "row", "line", "form", "value", t->reference_label,
          t->value_label, "difference");
  if (t->with_std)
    fprintf(fp, " %12s", "std");
  fprintf(fp, "  note\n");
  for (r = 0; r < l->n_rows; r++) {
    const twf_link_row *row = &l->rows[r];
    for (v = 0; v < TWF_LINK_NVALUES; v++) {
      double unit = link_is_angle(v) ? u->angle_si : u->length_si;
      int dec = link_is_angle(v) ? u->adec : u->ldec;
      int open = t->with_std && row->why[v] != TWF_LINK_DETERMINED;
      if (row->why[v] == TWF_LINK_NOT_IN_FORM)
        continue;
      fprintf(fp, "  %4zu %-8s %-5s %-6s %14.*f %14.*f", r, row_label(t->model, r),
              row->form == TWF_LINK_FORM_BETA ? "beta" : "dh", twf_link_value_name((twf_link_value)v), dec,
              cli_clean_shown(shown(row->reference[v], v, u), dec), dec,
              cli_clean_shown(shown(row->value[v], v, u), dec));
      /* a value the fit left open has no difference to show: it reflects
       * a frame or target convention, or the starting model's value */
      if (open)
        fprintf(fp, " %14s %12s", row->why[v] == TWF_LINK_NOT_FITTED ? "-" : "n/d",
                row->why[v] == TWF_LINK_NOT_FITTED ? "-" : "n/d");
      else {
        fprintf(fp, " %14.*f", dec, cli_clean_shown(t->difference[5 * r + (size_t)v] / unit, dec));
        if (t->with_std)
          fprintf(fp, " %12.*f", dec, cli_clean_shown(row->std[v] / unit, dec));
      }
      fprintf(fp, "  %s\n", note_of(row, v));
    }
  }
}

json_t *cli_links_json(const cli_links_table *t)
{
  const twf_links *l = t->links;
  const cli_units *u = t->units;
  json_t *o = json_object(), *rows = json_array();
  size_t r;
  int v;
  for (r = 0; r < l->n_rows; r++) {
    const twf_link_row *row = &l->rows[r];
    json_t *vals = json_object();
    for (v = 0; v < TWF_LINK_NVALUES; v++) {
      double unit = link_is_angle(v) ? u->angle_si : u->length_si;
      int det = row->why[v] == TWF_LINK_DETERMINED;
      int open = t->with_std && !det;
      if (row->why[v] == TWF_LINK_NOT_IN_FORM)
        continue;
      json_object_set_new(
        vals, twf_link_value_name((twf_link_value)v),
        json_pack("{s:o, s:o, s:o, s:o, s:b, s:s*}", t->reference_key, cli_json_number(shown(row->reference[v], v, u)),
                  t->value_key, cli_json_number(shown(row->value[v], v, u)), "difference",
                  open ? json_null() : cli_json_number(t->difference[5 * r + (size_t)v] / unit), "std",
                  t->with_std && det ? cli_json_number(row->std[v] / unit) : json_null(), "determined", det,
                  "note", det ? NULL : twf_link_why_text(row->why[v])));
    }
    json_array_append_new(rows, json_pack("{s:I, s:s, s:s, s:o}", "row", (json_int_t)r, "line",
                                          row_label(t->model, r), "form",
                                          row->form == TWF_LINK_FORM_BETA ? "beta" : "dh", "values", vals));
  }
  json_object_set_new(o, "full_pose", json_boolean(l->full_pose));
  json_object_set_new(o, "length_unit", json_string(u->length));
  json_object_set_new(o, "angle_unit", json_string(u->angle));
  json_object_set_new(o, "rows", rows);
  return o;
}
