/* export_sheet.c: `twistfit export MODEL --as sheet|sheet-csv`: the
 * parameter sheet, for entering a calibration into a controller by hand.
 * Per joint the zero offset, per link the link parameters of
 * twf_links_compute (the numbers the report and the DH export use, so
 * that report, export and controller screen agree), the base frame in the
 * instrument frame (from a base pose file) and the targets in the flange
 * frame, as x y z and three Euler angles of a stated convention. Every
 * convention and sign is spelled out in words on the sheet itself: a
 * number typed into a controller under the wrong convention moves the arm
 * somewhere else, and the sheet may be all the person at the pendant has.
 * Numbers are rounded to 0.1 um and 1e-7 rad (cli_units_of), far below
 * what a calibration determines and within what a controller accepts. */
#include "config.h"
#include "export_sheet.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct sheet_ctx {
  const twf_model *m;
  const char *source;
  twf_euler_convention eu;
  const char *base_path;   /* NULL: not given */
  twf_pose base_in_instrument;
  twf_links links;
  cli_units u;
} sheet_ctx;

typedef struct euler_words {
  const char *option;      /* rpy, zyx, zyz */
  const char *names[3];    /* the angles in the order printed */
  const char *formula;
  const char *words;
  const char *middle_range; /* of the middle angle, in degrees */
} euler_words;

static const euler_words euler_table[] = {
  { "rpy", { "roll", "pitch", "yaw" }, "R = Rz(yaw) Ry(pitch) Rx(roll)",
    "roll about the fixed x axis first, then pitch about the fixed y axis, then yaw\n"
    "  about the fixed z axis (the axes of the frame the pose is expressed in)",
    "pitch in [-90, 90] deg" },
  { "zyx", { "a", "b", "c" }, "R = Rz(a) Ry(b) Rx(c)",
    "intrinsic Z-Y'-X'': a about z, then b about the new y', then c about the\n"
    "  newest x'' (each turn about the axes the previous turns left)",
    "b in [-90, 90] deg" },
  { "zyz", { "a", "b", "c" }, "R = Rz(a) Ry(b) Rz(c)",
    "intrinsic Z-Y'-Z'': a about z, then b about the new y', then c about the\n"
    "  newest z'' (each turn about the axes the previous turns left)",
    "b in [0, 180] deg" },
};

int cli_sheet_parse_euler(const char *arg, twf_euler_convention *out)
{
  for (size_t k = 0; k < sizeof euler_table / sizeof euler_table[0]; k++) {
    if (strcmp(arg, euler_table[k].option) == 0) {
      *out = (twf_euler_convention)k;
      return 0;
    }
  }
  return cli_usage_error("export", "--euler takes rpy, zyx or zyz, not '%s'", arg);
}

static int is_angle(int v)
{
  return v == TWF_LINK_THETA || v == TWF_LINK_ALPHA || v == TWF_LINK_BETA;
}

/* A value in the sheet's unit at its fixed number of decimals, -0 and
 * rounding dust shown as 0. */
static const char *fixed(char *buf, size_t n, double si, double unit, int dec)
{
  snprintf(buf, n, "%.*f", dec, cli_clean(si / unit, 0.5 * pow(10.0, -dec)));
  return buf;
}

static const char *len_s(const sheet_ctx *x, char *buf, size_t n, double si)
{
  return fixed(buf, n, si, x->u.length_si, x->u.ldec);
}

static const char *ang_s(const sheet_ctx *x, char *buf, size_t n, double si)
{
  return fixed(buf, n, si, x->u.angle_si, x->u.adec);
}

/* Whether joint k's zero offset is its theta (revolute) or its d. */
static twf_link_value offset_value(const twf_joint *j)
{
  return j->type == TWF_JOINT_PRISMATIC ? TWF_LINK_D : TWF_LINK_THETA;
}

static void put_conventions(FILE *fp, const sheet_ctx *x)
{
  const euler_words *e = &euler_table[x->eu];
  fprintf(fp,
          "Conventions\n"
          "  Signs: every angle follows the right-hand rule: with the thumb of the right hand\n"
          "  along the axis, a positive angle turns the way the fingers curl (counter-clockwise\n"
          "  seen from the axis' tip looking back at the origin).\n"
          "  Link rows, standard DH with Hayati's beta: row k takes DH frame k-1 to frame k by\n"
          "  Rz(theta) Tz(d) Tx(a) Rx(alpha) Ry(beta), applied from the left in that order; the\n"
          "  flange pose is the product of rows 0 to n+1. A revolute joint's angle adds to theta\n"
          "  of its row, a prismatic joint's travel to d. Where consecutive axes are nearly\n"
          "  parallel the row has form beta (Hayati 1983): beta is the angle about the link's y\n"
          "  axis and there is no d (shown '-'); form dh rows have no beta.\n"
          "  Poses: 'F in G' is x y z, the origin of F in G's coordinates, and a rotation R whose\n"
          "  columns are F's axes in G's coordinates (a point p_F of F is R p_F + (x, y, z) in G).\n"
          "  Euler angles (--euler %s): %s:\n"
          "  %s.\n"
          "  Angles in %s; the first and last in [-180, 180] deg, %s. Near the\n"
          "  middle angle's limits (gimbal lock) only the sum or difference of the other two\n"
          "  matters; the last angle is then given as 0.\n",
          e->option, e->formula, e->words, x->u.angle, e->middle_range);
}

static void put_joints(FILE *fp, const sheet_ctx *x)
{
  const twf_model *m = x->m;
  char b[48];
  fprintf(fp,
          "\nJoint zero offsets: the DH theta (revolute) or d (prismatic) of the joint's row when\n"
          "the controller's joint value reads zero; %s and %s\n",
          x->u.angle, x->u.length);
  fprintf(fp, "  %-12s %-10s %18s  %s\n", "joint", "type", "zero offset", "note");
  for (size_t k = 0; k < m->n_joints; k++) {
    const twf_joint *j = &m->joints[k];
    const twf_link_row *row = &x->links.rows[k + 1];
    const twf_link_value v = offset_value(j);
    const double si = row->value[v];
    const char *note = row->why[v] == TWF_LINK_DETERMINED ? "" : twf_link_why_text(row->why[v]);
    fprintf(fp, "  %-12s %-10s %14s %-3s%s%s\n", j->name,
            j->type == TWF_JOINT_PRISMATIC ? "prismatic" : "revolute",
            v == TWF_LINK_D ? len_s(x, b, sizeof b, si) : ang_s(x, b, sizeof b, si),
            v == TWF_LINK_D ? x->u.length : x->u.angle, note[0] ? "  " : "", note);
  }
}

static void put_link_notes(FILE *fp, const twf_links *l)
{
  fprintf(fp, "  Values a calibration from point measurements does not determine (conventions of\n"
              "  the frames, not properties of the arm; enter them as shown):\n");
  for (size_t r = 0; r < l->n_rows; r++) {
    const twf_link_row *row = &l->rows[r];
    for (int why = TWF_LINK_BY_BASE; why <= TWF_LINK_PARALLEL_SLIDE; why++) {
      int first = 1;
      for (int v = 0; v < TWF_LINK_NVALUES; v++) {
        if ((int)row->why[v] != why)
          continue;
        if (first)
          fprintf(fp, "    row %zu: %s", r, twf_link_value_name((twf_link_value)v));
        else
          fprintf(fp, ", %s", twf_link_value_name((twf_link_value)v));
        first = 0;
      }
      if (!first)
        fprintf(fp, ": %s\n", twf_link_why_text((twf_link_why)why));
    }
  }
}

static void put_links(FILE *fp, const sheet_ctx *x)
{
  const twf_links *l = &x->links;
  char b[TWF_LINK_NVALUES][48];
  static const int order[TWF_LINK_NVALUES] = { TWF_LINK_A, TWF_LINK_ALPHA, TWF_LINK_D, TWF_LINK_THETA,
                                                TWF_LINK_BETA };
  fprintf(fp,
          "\nLink parameters: row 0 the base frame to DH frame 0, row k (1 to %zu) joint k's axis\n"
          "and the link to the next axis, row %zu the flange in frame %zu; a, d in %s, alpha,\n"
          "theta, beta in %s; theta and d at joint value zero\n",
          x->m->n_joints, l->n_rows - 1, x->m->n_joints, x->u.length, x->u.angle);
  fprintf(fp, "  %3s %-12s %-5s", "row", "joint", "form");
  for (int i = 0; i < TWF_LINK_NVALUES; i++)
    fprintf(fp, " %14s", twf_link_value_name((twf_link_value)order[i]));
  fputc('\n', fp);
  for (size_t r = 0; r < l->n_rows; r++) {
    const twf_link_row *row = &l->rows[r];
    const char *joint = r == 0 ? "(base)" : r == l->n_rows - 1 ? "(flange)" : x->m->joints[r - 1].name;
    fprintf(fp, "  %3zu %-12s %-5s", r, joint, row->form == TWF_LINK_FORM_BETA ? "beta" : "dh");
    for (int i = 0; i < TWF_LINK_NVALUES; i++) {
      const int v = order[i];
      const char *s = row->why[v] == TWF_LINK_NOT_IN_FORM ? "-"
                      : is_angle(v) ? ang_s(x, b[i], sizeof b[i], row->value[v])
                                    : len_s(x, b[i], sizeof b[i], row->value[v]);
      fprintf(fp, " %14s", s);
    }
    fputc('\n', fp);
  }
  put_link_notes(fp, l);
}

static void put_pose_row(FILE *fp, const sheet_ctx *x, const char *name, const double p[3],
                         const double R[3][3])
{
  char b[6][48];
  double a[3];
  twf_rot_to_euler(x->eu, R, a);
  fprintf(fp, "  %-12s %14s %14s %14s %14s %14s %14s\n", name, len_s(x, b[0], sizeof b[0], p[0]),
          len_s(x, b[1], sizeof b[1], p[1]), len_s(x, b[2], sizeof b[2], p[2]),
          ang_s(x, b[3], sizeof b[3], a[0]), ang_s(x, b[4], sizeof b[4], a[1]),
          ang_s(x, b[5], sizeof b[5], a[2]));
}

static void put_pose_header(FILE *fp, const sheet_ctx *x)
{
  const euler_words *e = &euler_table[x->eu];
  fprintf(fp, "  %-12s %14s %14s %14s %14s %14s %14s\n", "", "x", "y", "z", e->names[0], e->names[1],
          e->names[2]);
}

static void put_base(FILE *fp, const sheet_ctx *x)
{
  fprintf(fp, "\nBase frame in the instrument frame (%s and %s, --euler %s)\n", x->u.length, x->u.angle,
          euler_table[x->eu].option);
  if (x->base_path == NULL) {
    fprintf(fp, "  not given: pass --base FILE, the base pose file of the calibration\n"
                "  (twistfit calibrate --base-output)\n");
    return;
  }
  fprintf(fp, "  from %s\n", x->base_path);
  put_pose_header(fp, x);
  put_pose_row(fp, x, "base", x->base_in_instrument.p, x->base_in_instrument.R);
}

static void put_targets(FILE *fp, const sheet_ctx *x)
{
  static const double I[3][3] = { { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 1 } };
  const twf_model *m = x->m;
  fprintf(fp,
          "\nTargets in the flange frame (%s and %s, --euler %s); a target is a point, so its\n"
          "frame is taken parallel to the flange frame (angles 0), as for a tool point\n",
          x->u.length, x->u.angle, euler_table[x->eu].option);
  if (m->n_targets == 0) {
    fprintf(fp, "  none in the model\n");
    return;
  }
  put_pose_header(fp, x);
  for (size_t k = 0; k < m->n_targets; k++) {
    const twf_target *t = &m->targets[k];
    if (t->offset_known)
      put_pose_row(fp, x, t->name, t->offset, I);
    else
      fprintf(fp, "  %-12s not known (the model file gives no offset)\n", t->name);
  }
}

static int put_text(FILE *fp, void *ctx, twf_error *err)
{
  const sheet_ctx *x = ctx;
  (void)err;
  fprintf(fp, "Parameter sheet of %s", x->source);
  if (x->m->name[0])
    fprintf(fp, " (robot %s)", x->m->name);
  fprintf(fp, ", written by twistfit export (run %s)\n", cli_run_id());
  fprintf(fp, "Lengths in %s, angles in %s (the model's units), rounded to 0.1 um and 1e-7 rad.\n\n",
          x->u.length, x->u.angle);
  fputs(cli_safety_text, fp);
  fprintf(fp, "\nBefore entering anything, write down or save the controller's present\n"
              "parameters. Enter values in the controller's own units and conventions,\n"
              "converting where they differ from the ones stated here.\n\n");
  put_conventions(fp, x);
  put_joints(fp, x);
  put_links(fp, x);
  put_base(fp, x);
  put_targets(fp, x);
  return 0;
}

/* ------------------------------------------------------------- CSV */

/* One row of the long CSV form: section, item, quantity, value, unit,
 * note. value is a number (NaN: text_value instead). */
static void csv_row(cli_csv *c, const char *section, const char *item, const char *quantity, double value,
                    const char *text_value, const char *unit, const char *note)
{
  cli_csv_text(c, section);
  cli_csv_text(c, item);
  cli_csv_text(c, quantity);
  if (text_value != NULL)
    cli_csv_text(c, text_value);
  else
    cli_csv_number(c, value);
  cli_csv_text(c, unit);
  cli_csv_text(c, note);
  cli_csv_end_row(c);
}

/* src on one line (a line break and the blanks after it become one
 * blank): a CSV field with line breaks confuses spreadsheets and
 * line-based tools alike. */
static const char *one_line(char *dst, size_t n, const char *src)
{
  size_t k = 0;
  for (; *src != '\0' && k + 1 < n; src++) {
    if (*src == '\n') {
      while (src[1] == ' ')
        src++;
      if (src[1] != '\0')
        dst[k++] = ' ';
    } else {
      dst[k++] = *src;
    }
  }
  dst[k] = '\0';
  return dst;
}

/* The value in the unit, rounded as in the text sheet. */
static double rounded(double si, double unit, int dec)
{
  const double s = pow(10.0, dec);
  return cli_clean(round(si / unit * s) / s, 0.5 / s);
}

static void csv_pose(cli_csv *c, const sheet_ctx *x, const char *section, const char *item,
                     const double p[3], const double R[3][3], const char *note)
{
  static const char *const xyz[3] = { "x", "y", "z" };
  const euler_words *e = &euler_table[x->eu];
  double a[3];
  twf_rot_to_euler(x->eu, R, a);
  for (int i = 0; i < 3; i++)
    csv_row(c, section, item, xyz[i], rounded(p[i], x->u.length_si, x->u.ldec), NULL, x->u.length, note);
  for (int i = 0; i < 3; i++)
    csv_row(c, section, item, e->names[i], rounded(a[i], x->u.angle_si, x->u.adec), NULL, x->u.angle, note);
}

static int put_csv(FILE *fp, void *ctx, twf_error *err)
{
  static const double I[3][3] = { { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 1 } };
  const sheet_ctx *x = ctx;
  const twf_model *m = x->m;
  const euler_words *e = &euler_table[x->eu];
  char words[512], flat[1024];
  cli_csv c;
  (void)err;
  cli_csv_init(&c, fp);
  csv_row(&c, "section", "item", "quantity", NAN, "value", "unit", "note");
  csv_row(&c, "sheet", "source", "model", NAN, x->source, "", "");
  csv_row(&c, "sheet", "run", "id", NAN, cli_run_id(), "", "");
  csv_row(&c, "sheet", "units", "length", NAN, x->u.length, "", "the model's; rounded to 0.1 um");
  csv_row(&c, "sheet", "units", "angle", NAN, x->u.angle, "", "the model's; rounded to 1e-7 rad");
  csv_row(&c, "sheet", "safety", "caution", NAN, one_line(flat, sizeof flat, cli_safety_text), "", "");
  csv_row(&c, "sheet", "safety", "caution", NAN, "Before entering anything, write down or save the "
          "controller's present parameters. Enter values in the controller's own units and conventions, "
          "converting where they differ from the ones stated here.", "", "");
  csv_row(&c, "sheet", "signs", "rule", NAN, "right-hand rule: a positive angle turns counter-clockwise "
          "seen from the axis' tip", "", "");
  csv_row(&c, "sheet", "links", "convention", NAN, "row k: Rz(theta) Tz(d) Tx(a) Rx(alpha) Ry(beta); "
          "joint value added to theta (revolute) or d (prismatic); form beta: no d", "", "");
  csv_row(&c, "sheet", "poses", "convention", NAN, "F in G: x y z = origin of F in G; R columns = F's axes "
          "in G", "", "");
  snprintf(words, sizeof words, "%s: %s; %s; at the gimbal lock the last angle is 0", e->formula, e->words,
           e->middle_range);
  csv_row(&c, "sheet", "euler", e->option, NAN, one_line(flat, sizeof flat, words), "", "");
  for (size_t k = 0; k < m->n_joints; k++) {
    const twf_joint *j = &m->joints[k];
    const twf_link_row *row = &x->links.rows[k + 1];
    const twf_link_value v = offset_value(j);
    const int len = v == TWF_LINK_D;
    csv_row(&c, "joint", j->name, "zero_offset",
            rounded(row->value[v], len ? x->u.length_si : x->u.angle_si, len ? x->u.ldec : x->u.adec), NULL,
            len ? x->u.length : x->u.angle,
            row->why[v] == TWF_LINK_DETERMINED ? "" : twf_link_why_text(row->why[v]));
  }
  for (size_t r = 0; r < x->links.n_rows; r++) {
    const twf_link_row *row = &x->links.rows[r];
    char item[24];
    snprintf(item, sizeof item, "%zu", r);
    csv_row(&c, "link", item, "form", NAN, row->form == TWF_LINK_FORM_BETA ? "beta" : "dh", "", "");
    for (int v = 0; v < TWF_LINK_NVALUES; v++) {
      const int ang = is_angle(v);
      if (row->why[v] == TWF_LINK_NOT_IN_FORM)
        continue;
      csv_row(&c, "link", item, twf_link_value_name((twf_link_value)v),
              rounded(row->value[v], ang ? x->u.angle_si : x->u.length_si, ang ? x->u.adec : x->u.ldec),
              NULL, ang ? x->u.angle : x->u.length,
              row->why[v] == TWF_LINK_DETERMINED ? "" : twf_link_why_text(row->why[v]));
    }
  }
  if (x->base_path == NULL)
    csv_row(&c, "base", "base_in_instrument", "pose", NAN, "not given", "", "pass --base FILE");
  else
    csv_pose(&c, x, "base", "base_in_instrument", x->base_in_instrument.p, x->base_in_instrument.R,
             x->base_path);
  for (size_t k = 0; k < m->n_targets; k++) {
    const twf_target *t = &m->targets[k];
    if (t->offset_known)
      csv_pose(&c, x, "target", t->name, t->offset, I, "in the flange frame; a point: angles 0");
    else
      csv_row(&c, "target", t->name, "pose", NAN, "not known", "", "");
  }
  return 0;
}

int cli_export_sheet(const twf_model *m, const char *source, int csv, twf_euler_convention eu,
                     const char *base_path, const twf_model *like, const char *output,
                     int force, const char *const *inputs)
{
  sheet_ctx x;
  twf_links_options opt = twf_links_default_options();
  twf_error err;
  cli_put put;
  int status;
  memset(&x, 0, sizeof x);
  twf_error_clear(&err);
  x.m = m;
  x.source = source;
  x.eu = eu;
  x.base_path = base_path;
  cli_units_of(&x.u, m);
  if (base_path != NULL) {
    if (twf_base_read(base_path, &x.base_in_instrument, &err) != TWF_OK)
      return cli_report_error(&err);
    /* a base pose of another calibration than the model is a mistake
     * worth a warning, not a refusal: the sheet shows both as read */
    cli_check_same_run("export", source, "model", base_path, "base pose", 0, 0);
  }
  opt.reference = like;
  if (twf_links_compute(m, &opt, &x.links, &err) != TWF_OK)
    return cli_report_error(&err);
  put.path = output != NULL ? output : "-";
  put.put = csv ? put_csv : put_text;
  put.ctx = &x;
  status = cli_write_outputs(&put, 1, force, inputs);
  twf_links_clear(&x.links);
  return status;
}
