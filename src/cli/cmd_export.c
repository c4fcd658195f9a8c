/* cmd_export.c: `twistfit export MODEL --as FORMAT`: a model in another
 * form. One function per format, chosen by a switch on --as:
 *   dh, mdh   a standard / modified DH model file (twistfit-model(5)),
 *             by twf_model_to_dh, with Hayati's beta where the axes are
 *             nearly parallel (--no-beta: plain rows, refused when they
 *             would need absurd lengths);
 *   sheet, sheet-csv   the parameter sheet for entering a calibration by
 *             hand (export_sheet.c);
 *   urdf      a URDF robot, or the user's URDF with its chain changed
 *             (--like), in urdf_cli.c. */
#define _GNU_SOURCE
#include "config.h"
#include "cli.h"
#include "export_sheet.h"
#include "urdf_cli.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char export_help[] =
  "Usage: twistfit export [OPTIONS] MODEL --as FORMAT\n"
  "\n"
  "Write MODEL in another form. FORMAT is one of:\n"
  "  dh     a model file of standard (distal) Denavit-Hartenberg rows\n"
  "  mdh    a model file of modified (proximal, Craig) DH rows\n"
  "  sheet, sheet-csv\n"
  "         a parameter sheet (text or CSV) for entering the model into a\n"
  "         controller by hand: zero offsets, link parameters, base frame and\n"
  "         targets, with the conventions and signs in words\n"
  "  urdf   a URDF robot: a link per joint, the flange and target links on\n"
  "         fixed joints, SI units; with --like FILE, a copy of FILE whose chain\n"
  "         joints' origins and axes are changed to MODEL's (all else kept)\n"
  "The DH files carry Hayati's fifth value beta where consecutive joint axes\n"
  "are nearly parallel, and [base] and [flange] poses; twistfit reads them\n"
  "back with the same kinematics. Joint names, limits, scales and targets are\n"
  "carried over; the zero offsets go into the rows' theta (or d). The\n"
  "conversion residual (forward kinematics of the table against MODEL) is\n"
  "printed on standard error, with a warning above 1 um or 1 urad.\n"
  "\n"
  "Options:\n"
  "      --as FORMAT            dh, mdh, sheet, sheet-csv or urdf (required)\n"
  "      --no-beta              plain four-value rows; refused when nearly\n"
  "                             parallel axes would need lengths beyond 10 times\n"
  "                             the arm's reach\n"
  "      --euler rpy|zyx|zyz    sheet: the angles of poses: roll, pitch, yaw about\n"
  "                             the fixed x, y, z axes (rpy, the default);\n"
  "                             intrinsic z, y', x'' (zyx) or z, y', z'' (zyz)\n"
  "      --base FILE            sheet: the base pose file that calibrate wrote, the\n"
  "                             base frame in the instrument frame\n"
  "      --like FILE            (urdf) write into a copy of the URDF file FILE;\n"
  "                             (dh, mdh, sheet) in the conventions of the model\n"
  "                             FILE, e.g. the nominal: its link forms and the\n"
  "                             signs of its DH x axes, so the rows compare one\n"
  "                             to one (no half turns in alpha and theta)\n"
  "      --base-link LINK       (URDF) the chain's base link (default: the root)\n"
  "      --tip-link LINK        (URDF) the chain's tip, the flange (default: the\n"
  "                             one tip); for a URDF MODEL and the --like FILE\n"
  "      --target-link LINK     (URDF MODEL) a link fixed to the tip that is a\n"
  "                             target (repeat; default: every such link\n"
  "                             without children)\n"
  "  -o, --output FILE          write to FILE (atomically) instead of stdout\n"
  "  -f, --force                replace FILE when it exists\n"
  "  -h, --help                 show this help\n";

enum { OPT_AS = 256, OPT_NO_BETA, OPT_EULER, OPT_BASE, OPT_LIKE, OPT_BASE_LINK, OPT_TIP_LINK,
       OPT_TARGET_LINK };

/* Configurations of the conversion residual (seeded, within the limits). */
#define EXPORT_RESIDUAL_CONFIGS 1000
#define EXPORT_RESIDUAL_SEED 20260903ULL

typedef struct dh_ctx {
  const twf_model *model;
  const char *source;
  const char *like_path; /* NULL, or the model whose conventions the table follows */
  twf_dh_convention conv;
  const twf_dh_row *rows;
  twf_pose base, flange;
  twf_dh_fit fit;
} dh_ctx;

/* A value of the table in the file's unit: rounding left-overs of the
 * conversion (below 1e-13 m or rad) as 0, else the shortest decimal that
 * reads back to the same double (cli_shortest_double). One buffer per
 * argument of a fprintf: slot picks it. */
static const char *num(double si, double unit, int slot)
{
  static char buf[4][CLI_SHORTEST_MAX];
  return cli_shortest_double(buf[slot], sizeof buf[slot], fabs(si) < 1e-13 ? 0.0 : si, unit);
}

/* The conversion computes each value from differences of SI points and
 * loses some ulps doing so (a2 of tf6s is 1.06 m - 0.45 m =
 * 0.61000000000000010 m; tf7's a1 came out 7 ulps off), so its last bits
 * are noise, not geometry. A value within 1e-14 relative of a 15-digit
 * decimal in the file's unit is set to that decimal's double before the
 * residual is computed, so the file shows 610, reads back to the very
 * table whose residual is reported, and the change (1e-14 m on a 1 m arm)
 * is part of that residual. */
static double snap(double si, double unit)
{
  char s[CLI_SHORTEST_MAX];
  double x;
  if (fabs(si) < 1e-13)
    return 0.0;
  snprintf(s, sizeof s, "%.15g", si / unit);
  x = strtod(s, NULL) * unit;
  return fabs(x - si) <= 1e-14 * fabs(si) ? x : si;
}

static void snap_table(const twf_model *m, twf_dh_row *rows, twf_pose *base, twf_pose *flange)
{
  const double lu = twf_length_unit_si(m->length_unit);
  const double au = twf_angle_unit_si(m->angle_unit);
  for (size_t k = 0; k < m->n_joints; k++) {
    rows[k].a = snap(rows[k].a, lu);
    rows[k].d = snap(rows[k].d, lu);
    rows[k].alpha = snap(rows[k].alpha, au);
    rows[k].theta = snap(rows[k].theta, au);
    rows[k].beta = snap(rows[k].beta, au);
  }
  for (int i = 0; i < 3; i++) {
    base->p[i] = snap(base->p[i], lu);
    flange->p[i] = snap(flange->p[i], lu);
  }
}

static void put_pose(FILE *fp, const char *section, const twf_pose *T, double lu)
{
  double q[4];
  twf_rot_to_quat(T->R, q);
  fprintf(fp, "\n[%s]\nposition = %s %s %s\n", section, num(T->p[0], lu, 0), num(T->p[1], lu, 1),
          num(T->p[2], lu, 2));
  fprintf(fp, "quaternion_wxyz = %s %s %s %s\n", num(q[0], 1.0, 0), num(q[1], 1.0, 1),
          num(q[2], 1.0, 2), num(q[3], 1.0, 3));
}

static int put_dh(FILE *fp, void *ctx, twf_error *err)
{
  const dh_ctx *x = ctx;
  const twf_model *m = x->model;
  const double lu = twf_length_unit_si(m->length_unit);
  const double au = twf_angle_unit_si(m->angle_unit);
  const int std = x->conv == TWF_DH_STANDARD;
  (void)err;
  fprintf(fp, "; %s of %s, written by twistfit export (run %s).\n",
          std ? "Standard DH model" : "Modified DH model", x->source, cli_run_id());
  if (std)
    fprintf(fp, "; dh = a alpha d theta [beta]: A_i = Rz(theta + q) Tz(d) Tx(a) Rx(alpha) Ry(beta).\n");
  else
    fprintf(fp, "; mdh = alpha a d theta [beta]: A_i = Rx(alpha) Tx(a) Ry(beta) Rz(theta + q) Tz(d).\n");
  fprintf(fp, "; Flange pose: [base] A_1 ... A_n [flange]. Zero offsets are in theta (or d).\n");
  if (x->like_path != NULL)
    fprintf(fp, "; Link forms and signs of the x axes as in %s.\n", x->like_path);
  fprintf(fp, "; Conversion residual over %zu configurations: position max %.3g um, angle max %.3g urad.\n",
          x->fit.n_configs, x->fit.max_position_m * 1e6, x->fit.max_angle_rad * 1e6);
  fprintf(fp, "[robot]\n");
  if (m->name[0])
    fprintf(fp, "name = %s\n", m->name);
  fprintf(fp, "length_unit = %s\nangle_unit = %s\n", twf_length_unit_name(m->length_unit),
          twf_angle_unit_name(m->angle_unit));
  if (m->gravity[0] != 0.0 || m->gravity[1] != 0.0 || m->gravity[2] != -1.0)
    fprintf(fp, "gravity = %s %s %s\n", num(m->gravity[0], 1.0, 0), num(m->gravity[1], 1.0, 1),
            num(m->gravity[2], 1.0, 2));
  for (size_t k = 0; k < m->n_joints; k++) {
    const twf_joint *j = &m->joints[k];
    const twf_dh_row *r = &x->rows[k];
    fprintf(fp, "\n[joint %s]\ntype = %s\n", j->name,
            j->type == TWF_JOINT_PRISMATIC ? "prismatic" : "revolute");
    if (std)
      fprintf(fp, "dh = %s %s %s %s", num(r->a, lu, 0), num(r->alpha, au, 1), num(r->d, lu, 2),
              num(r->theta, au, 3));
    else
      fprintf(fp, "mdh = %s %s %s %s", num(r->alpha, au, 0), num(r->a, lu, 1), num(r->d, lu, 2),
              num(r->theta, au, 3));
    if (fabs(r->beta) >= 1e-13)
      fprintf(fp, " %s", num(r->beta, au, 0));
    fputc('\n', fp);
    if (j->has_limits) {
      double u = j->type == TWF_JOINT_PRISMATIC ? lu : au;
      fprintf(fp, "limits = %s %s\n", num(j->limit_lo, u, 0), num(j->limit_hi, u, 1));
    }
    if (j->scale != 1.0)
      fprintf(fp, "scale = %s\n", num(j->scale, 1.0, 0));
    if (j->compliance != 0.0) {
      /* rad per N m in every form: the joint's yield is the same */
      char c[CLI_SHORTEST_MAX];
      fprintf(fp, "compliance = %s\n", cli_shortest_double(c, sizeof c, j->compliance, 1.0));
    }
  }
  put_pose(fp, "base", &x->base, lu);
  put_pose(fp, "flange", &x->flange, lu);
  for (size_t k = 0; k < m->n_targets; k++) {
    const twf_target *t = &m->targets[k];
    fprintf(fp, "\n[target %s]\n", t->name);
    if (t->offset_known)
      fprintf(fp, "offset = %s %s %s\n", num(t->offset[0], lu, 0), num(t->offset[1], lu, 1),
              num(t->offset[2], lu, 2));
  }
  /* the mass model: its centres are in the model's base frame, which the
   * DH file keeps ([base] places DH frame 0 in it), at the joints' zero;
   * the DH rows take the zero offsets into theta, so a body's centre is
   * carried to where the offsets before it and its own put it */
  {
    twf_pose P;
    twf_pose_identity(&P);
    for (size_t k = 0; k < m->n_joints; k++) {
      const twf_joint *j = &m->joints[k];
      twf_pose E;
      double c[3];
      twf_se3_exp(j->twist, j->offset, &E);
      twf_pose_mul(&P, &E, &P);
      if (!j->has_mass)
        continue;
      twf_pose_apply(&P, j->mass_center, c);
      fprintf(fp, "\n[mass %s]\nmass = %s\ncenter = %s %s %s\n", j->name, num(j->mass, 1.0, 3),
              num(c[0], lu, 0), num(c[1], lu, 1), num(c[2], lu, 2));
    }
  }
  for (size_t k = 0; k < m->n_payloads; k++) {
    const twf_payload *pl = &m->payloads[k];
    fprintf(fp, "\n[payload %s]\nmass = %s\ncenter = %s %s %s\n", pl->name, num(pl->mass, 1.0, 3),
            num(pl->center[0], lu, 0), num(pl->center[1], lu, 1), num(pl->center[2], lu, 2));
  }
  return 0;
}

/* --as dh / mdh */
static int export_dh(const twf_model *m, const char *source, twf_dh_convention conv, int use_beta,
                     const twf_model *like, const char *like_path, const char *output,
                     int force, const char *const *inputs)
{
  dh_ctx x;
  twf_dh_row *rows = calloc(m->n_joints ? m->n_joints : 1, sizeof *rows);
  twf_error err;
  cli_put put;
  int status;
  const double reach = twf_model_reach(m);
  /* the table and its residual are of the rigid arm: the compliances
   * and the mass model are written beside the rows */
  twf_model *rigid = twf_model_copy(m);
  if (rows == NULL || rigid == NULL) {
    free(rows);
    twf_model_free(rigid);
    return cli_out_of_memory();
  }
  for (size_t k = 0; k < rigid->n_joints; k++)
    rigid->joints[k].compliance = 0.0;
  twf_error_clear(&err);
  memset(&x, 0, sizeof x);
  if (twf_model_to_dh_like(rigid, like, conv, use_beta, rows, &x.base, &x.flange, &err) != TWF_OK)
    goto fail;
  snap_table(rigid, rows, &x.base, &x.flange);
  if (twf_dh_residual(rigid, rows, conv, &x.base, &x.flange, EXPORT_RESIDUAL_CONFIGS,
                      EXPORT_RESIDUAL_SEED, &x.fit, &err) != TWF_OK)
    goto fail;
  if (!use_beta) {
    const double lim = 10.0 * (reach > 0.1 ? reach : 0.1);
    for (size_t k = 0; k < m->n_joints; k++) {
      if (fabs(rows[k].d) > lim || fabs(rows[k].a) > lim) {
        fprintf(stderr,
                "twistfit export: error: plain DH needs %s = %.6g m at joint %s (more than 10 times "
                "the reach, %.3g m): its axis is nearly parallel to the previous one\n"
                "  hint: leave out --no-beta: the fifth value beta describes such links exactly\n",
                fabs(rows[k].d) > lim ? "d" : "a", fabs(rows[k].d) > lim ? rows[k].d : rows[k].a,
                m->joints[k].name, reach);
        free(rows);
        twf_model_free(rigid);
        return TWF_EXIT_COMPUTE;
      }
    }
  }
  x.model = m;
  x.source = source;
  x.like_path = like_path;
  x.conv = conv;
  x.rows = rows;
  put.path = output != NULL ? output : "-";
  put.put = put_dh;
  put.ctx = &x;
  status = cli_write_outputs(&put, 1, force, inputs);
  if (status == TWF_EXIT_OK) {
    if (cli_verbosity > 0)
      fprintf(stderr,
              "twistfit export: conversion residual over %zu configurations within the limits: "
              "position RMS %.3g um, max %.3g um; angle RMS %.3g urad, max %.3g urad\n",
              x.fit.n_configs, x.fit.rms_position_m * 1e6, x.fit.max_position_m * 1e6,
              x.fit.rms_angle_rad * 1e6, x.fit.max_angle_rad * 1e6);
    if (x.fit.max_position_m > 1e-6 || x.fit.max_angle_rad > 1e-6)
      fprintf(stderr,
              "twistfit export: warning: the table differs from the model by more than 1 um or "
              "1 urad%s\n",
              use_beta ? "" : "; leave out --no-beta for an exact table");
  }
  free(rows);
  twf_model_free(rigid);
  return status;
fail:
  free(rows);
  twf_model_free(rigid);
  return cli_report_error(&err);
}

typedef enum export_format { FMT_NONE, FMT_DH, FMT_MDH, FMT_SHEET, FMT_SHEET_CSV, FMT_URDF } export_format;

static int run_export(int argc, char **argv)
{
  static const struct option longopts[] = {
    { "output", required_argument, NULL, 'o' },
    { "force", no_argument, NULL, 'f' },
    { "as", required_argument, NULL, OPT_AS },
    { "no-beta", no_argument, NULL, OPT_NO_BETA },
    { "euler", required_argument, NULL, OPT_EULER },
    { "base", required_argument, NULL, OPT_BASE },
    { "like", required_argument, NULL, OPT_LIKE },
    { "base-link", required_argument, NULL, OPT_BASE_LINK },
    { "tip-link", required_argument, NULL, OPT_TIP_LINK },
    { "target-link", required_argument, NULL, OPT_TARGET_LINK },
    { "help", no_argument, NULL, 'h' },
    { NULL, 0, NULL, 0 }
  };
  static const char *const names[1] = { "--output" };
  const char *output = NULL, *inputs[4] = { NULL, NULL, NULL, NULL }, *euler = NULL, *base = NULL, *like = NULL;
  twf_euler_convention eu = TWF_EULER_RPY;
  twf_read_options ropt = twf_read_default_options();
  cli_urdf_links links;
  int force = 0, use_beta = 1, opt, status = TWF_EXIT_OK;
  export_format fmt = FMT_NONE;
  twf_model *m = NULL, *like_model = NULL;
  twf_warnings warnings;
  twf_error err;

  twf_warnings_init(&warnings);
  twf_error_clear(&err);
  links.n_targets = 0;
  optind = 0;
  opterr = 0;
  while ((opt = getopt_long(argc, argv, ":o:fh", longopts, NULL)) != -1) {
    switch (opt) {
    case 'o': output = optarg; break;
    case 'f': force = 1; break;
    case OPT_NO_BETA: use_beta = 0; break;
    case OPT_EULER: euler = optarg; break;
    case OPT_BASE: base = optarg; break;
    case OPT_LIKE: like = optarg; break;
    case OPT_BASE_LINK:
    case OPT_TIP_LINK:
    case OPT_TARGET_LINK:
      if ((status = cli_urdf_option("export", opt == OPT_BASE_LINK ? "base-link"
                                              : opt == OPT_TIP_LINK ? "tip-link" : "target-link",
                                    optarg, &links, &ropt)) != 0)
        goto done;
      break;
    case OPT_AS:
      if (strcmp(optarg, "dh") == 0)
        fmt = FMT_DH;
      else if (strcmp(optarg, "mdh") == 0)
        fmt = FMT_MDH;
      else if (strcmp(optarg, "sheet") == 0)
        fmt = FMT_SHEET;
      else if (strcmp(optarg, "sheet-csv") == 0)
        fmt = FMT_SHEET_CSV;
      else if (strcmp(optarg, "urdf") == 0)
        fmt = FMT_URDF;
      else {
        status = cli_usage_error("export", "--as takes dh, mdh, sheet, sheet-csv or urdf, not '%s'", optarg);
        goto done;
      }
      break;
    case 'h': fputs(export_help, stdout); goto done;
    default: status = cli_bad_option("export", opt, argv); goto done;
    }
  }
  if (argc - optind != 1) {
    status = cli_usage_error("export", "expected one MODEL");
    goto done;
  }
  if (fmt == FMT_NONE) {
    status = cli_usage_error("export", "give the form with --as dh, --as mdh, --as sheet, --as sheet-csv or --as urdf");
    goto done;
  }
  if ((euler != NULL || base != NULL) && fmt != FMT_SHEET && fmt != FMT_SHEET_CSV) {
    status = cli_usage_error("export", "%s applies to --as sheet and sheet-csv only",
                             euler != NULL ? "--euler" : "--base");
    goto done;
  }
  if (euler != NULL && (status = cli_sheet_parse_euler(euler, &eu)) != 0)
    goto done;
  inputs[0] = argv[optind];
  /* the files no output may replace, NULL-terminated */
  inputs[1] = base ? base : like;
  inputs[2] = base ? like : NULL;
  if ((status = cli_outputs_check("export", &output, names, 1, force, inputs)) != 0)
    goto done;
  m = twf_model_read_with(inputs[0], &ropt, &warnings, NULL, &err);
  cli_print_warnings(&warnings);
  if (m == NULL) {
    status = cli_report_error(&err);
    goto done;
  }
  if (like != NULL && fmt != FMT_URDF) {
    /* the reference model whose conventions the table follows */
    twf_warnings_clear(&warnings);
    twf_warnings_init(&warnings);
    like_model = twf_model_read_with(like, &ropt, &warnings, NULL, &err);
    cli_print_warnings(&warnings);
    if (like_model == NULL) {
      status = cli_report_error(&err);
      goto done;
    }
  }
  if ((fmt == FMT_SHEET || fmt == FMT_SHEET_CSV || fmt == FMT_URDF) && twf_model_has_compliance(m) &&
      cli_verbosity > 0)
    fprintf(stderr, "twistfit export: warning: %s carries joint compliances, which %s does not hold: "
                    "the exported arm is the rigid one (the deflection under gravity is left out)\n",
            inputs[0], fmt == FMT_URDF ? "a URDF joint" : "the parameter sheet");
  switch (fmt) {
  case FMT_DH:
    status = export_dh(m, inputs[0], TWF_DH_STANDARD, use_beta, like_model, like, output, force,
                       inputs);
    break;
  case FMT_MDH:
    status = export_dh(m, inputs[0], TWF_DH_MODIFIED, use_beta, like_model, like, output, force,
                       inputs);
    break;
  case FMT_SHEET:
  case FMT_SHEET_CSV:
  case FMT_URDF:
    /* formats without compliance: the rigid arm, as the warning says */
    for (size_t k = 0; k < m->n_joints; k++)
      m->joints[k].compliance = 0.0;
    status = fmt == FMT_URDF ? cli_export_urdf(m, like, &ropt, output, force, inputs)
                             : cli_export_sheet(m, inputs[0], fmt == FMT_SHEET_CSV, eu, base, like_model,
                                                output, force, inputs);
    break;
  case FMT_NONE: break;
  }
done:
  twf_model_free(m);
  twf_model_free(like_model);
  twf_warnings_clear(&warnings);
  return status;
}

const cli_command cli_cmd_export = {
  "export", run_export, "write a model as a DH or modified DH model file, as URDF or as a parameter sheet", export_help
};
