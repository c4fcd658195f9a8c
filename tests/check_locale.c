/* check_locale.c: the readers and writers under a locale whose decimal
 * separator is a comma. A program that calls setlocale(LC_ALL, "") in such
 * a locale must still read "0.5" in a model, base pose or campaign file,
 * write "0.5" rather than "0,5", read back what it wrote, and find its own
 * locale unchanged afterwards (twistfit-model(5) and twistfit-data(5)
 * define the decimal point; C11 7.22.1.3 makes strtod follow LC_NUMERIC).
 *
 * When no such locale is installed, main() builds de_DE.UTF-8 with
 * localedef into a temporary LOCPATH (its sources come with Debian's
 * 'locales' package). When that fails too, every test fails and says why:
 * a skipped test would hide the very bug it is here for. */
#include "testutil.h"
#include "twistfit.h"

#include <dirent.h>
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

static const char *comma_locale;  /* name that setlocale accepts, or NULL */
static char why_none[1024];       /* why there is none */
static char locpath[256];         /* our LOCPATH, "" when not needed */
static int decimal_comma(void)
{
  const struct lconv *lc = localeconv();
  return lc->decimal_point != NULL && strcmp(lc->decimal_point, ",") == 0;
}

static int try_locale(const char *name)
{
  int ok = setlocale(LC_ALL, name) != NULL && decimal_comma();
  setlocale(LC_ALL, "C");
  return ok;
}

static void remove_dir(const char *dir)
{
  char cmd[600];
  if (dir[0] == '\0')
    return;
  /* localedef writes a tree of files: let rm take it apart. */
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0)
    fprintf(stderr, "check_locale: could not remove %s\n", dir);
}

/* Find or make a decimal-comma locale; runs once, before the tests. */
static void find_comma_locale(void)
{
  static const char *const installed[] = {
    "de_DE.UTF-8", "de_DE.utf8", "fr_FR.UTF-8", "fr_FR.utf8", "nl_NL.UTF-8",
    "es_ES.UTF-8", "it_IT.UTF-8", "de_DE", "fr_FR"
  };
  char cmd[800];
  size_t i;
  int rc;
  for (i = 0; i < sizeof installed / sizeof installed[0]; i++)
    if (try_locale(installed[i])) {
      comma_locale = installed[i];
      return;
    }
  snprintf(locpath, sizeof locpath, "/tmp/check_locale.XXXXXX");
  if (mkdtemp(locpath) == NULL) {
    snprintf(why_none, sizeof why_none,
             "no decimal-comma locale is installed and no temporary "
             "directory could be made for localedef");
    locpath[0] = '\0';
    return;
  }
  snprintf(cmd, sizeof cmd,
           "localedef -i de_DE -f UTF-8 '%s/de_DE.UTF-8' >'%s/localedef.log' 2>&1",
           locpath, locpath);
  rc = system(cmd);
  /* localedef exits 1 on mere warnings: what counts is whether the
   * locale loads. glibc reads LOCPATH at every setlocale call. */
  setenv("LOCPATH", locpath, 1);
  if (try_locale("de_DE.UTF-8")) {
    comma_locale = "de_DE.UTF-8";
    return;
  }
  snprintf(why_none, sizeof why_none,
           "no decimal-comma locale (de_DE.UTF-8, fr_FR.UTF-8, ...) is "
           "installed and 'localedef -i de_DE -f UTF-8' into %s failed "
           "(%s %d): install Debian's 'locales' package, which "
           "provides /usr/share/i18n/locales/de_DE and the UTF-8 charmap "
           "(or generate de_DE.UTF-8 with locale-gen)", locpath,
           rc != -1 && WIFEXITED(rc) ? "exit status" : "wait status",
           rc != -1 && WIFEXITED(rc) ? WEXITSTATUS(rc) : rc);
}

/* Every test starts here: the process in the decimal-comma locale, as a
 * program that called setlocale(LC_ALL, "") under it would be. */
static void enter_comma_locale(void)
{
  char s[16];
  ck_assert_msg(comma_locale != NULL, "%s", why_none);
  ck_assert_ptr_nonnull(setlocale(LC_ALL, comma_locale));
  snprintf(s, sizeof s, "%.1f", 0.5);
  ck_assert_msg(strcmp(s, "0,5") == 0, "locale %s prints 0.5 as '%s'",
                comma_locale, s);
}

/* The caller's locale is back: the global one still has the comma, and
 * the thread is not left in a locale of the library's. */
static void assert_locale_restored(void)
{
  char s[16];
  snprintf(s, sizeof s, "%.1f", 0.5);
  ck_assert_str_eq(s, "0,5");
  ck_assert(decimal_comma());
  ck_assert(uselocale((locale_t)0) == LC_GLOBAL_LOCALE);
}

/* Unround values with a fractional part, so that every number needs the
 * decimal separator; the second axis is not unit length in decimal, so
 * the writer has to print 17 digits. */
static const char MODEL[] =
    "[robot]\n"
    "name = comma\n"
    "length_unit = mm\n"
    "angle_unit = deg\n"
    "[joint j1]\n"
    "type = revolute\n"
    "axis = 0 0 1\n"
    "point = 0 0 0.5\n"
    "limits = -170.5 170.5\n"
    "offset = 0.25\n"
    "[joint j2]\n"
    "type = revolute\n"
    "axis = 0 0.7071067811865476 0.7071067811865476\n"
    "point = 12.5 0 450.5\n"
    "limits = -120.75 120.75\n"
    "scale = 1.0005\n"
    "[home]\n"
    "position = 0.5 -2.385 900.25\n"
    "quaternion_wxyz = 0.7071067811865476 0 0.7071067811865476 0\n"
    "[target T1]\n"
    "offset = 0.5 -0.25 10.125\n";

static twf_model *read_model_ok(const char *path)
{
  twf_error err;
  twf_model *m = twf_model_read(path, NULL, &err);
  ck_assert_msg(m != NULL, "%s:%ld:%ld: %s", err.file, err.line, err.column,
                err.message);
  return m;
}

static void assert_same_model(const twf_model *a, const twf_model *b)
{
  size_t i, k;
  ck_assert_uint_eq(a->n_joints, b->n_joints);
  ck_assert_uint_eq(a->n_targets, b->n_targets);
  for (i = 0; i < a->n_joints; i++) {
    for (k = 0; k < 6; k++)
      ck_assert_close(a->joints[i].twist[k], b->joints[i].twist[k], 1e-15);
    for (k = 0; k < 3; k++)
      ck_assert_close(a->joints[i].point[k], b->joints[i].point[k], 1e-15);
    ck_assert(a->joints[i].offset == b->joints[i].offset);
    ck_assert(a->joints[i].scale == b->joints[i].scale);
    ck_assert(a->joints[i].limit_lo == b->joints[i].limit_lo);
    ck_assert(a->joints[i].limit_hi == b->joints[i].limit_hi);
  }
  for (k = 0; k < 3; k++) {
    ck_assert(a->home.p[k] == b->home.p[k]);
    ck_assert(a->targets[0].offset[k] == b->targets[0].offset[k]);
    for (i = 0; i < 3; i++)
      ck_assert_close(a->home.R[k][i], b->home.R[k][i], 1e-15);
  }
}

START_TEST(test_model_file)
{
  twf_model *m, *back;
  twf_error err;
  char *text;
  FILE *f;
  enter_comma_locale();
  twf_test_tmpdir_make("check_locale_files");
  twf_test_write_file(twf_test_tmppath("m.ini"), MODEL);
  m = read_model_ok(twf_test_tmppath("m.ini"));
  assert_locale_restored();
  ck_assert(m->joints[0].point[2] == twf_length_to_si(0.5, TWF_LENGTH_MM));
  ck_assert(m->joints[0].offset == twf_angle_to_si(0.25, TWF_ANGLE_DEG));
  ck_assert(m->joints[1].scale == 1.0005);
  ck_assert(m->home.p[1] == twf_length_to_si(-2.385, TWF_LENGTH_MM));

  f = fopen(twf_test_tmppath("w.ini"), "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_model_write(m, f, &err), TWF_OK);
  ck_assert_int_eq(fclose(f), 0);
  assert_locale_restored();
  text = twf_test_slurp(twf_test_tmppath("w.ini"));
  ck_assert_msg(strstr(text, "point = 0 0 0.5\n") != NULL, "%s", text);
  ck_assert_msg(strstr(text, "offset = 0.25\n") != NULL, "%s", text);
  ck_assert_msg(strstr(text, "scale = 1.0005\n") != NULL, "%s", text);
  ck_assert_msg(strstr(text, "position = 0.5 -2.385 900.25\n") != NULL, "%s", text);
  ck_assert_msg(strstr(text, "0,") == NULL, "a decimal comma in:\n%s", text);
  free(text);

  back = read_model_ok(twf_test_tmppath("w.ini"));
  assert_same_model(m, back);
  assert_locale_restored();
  twf_model_free(back);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_base_file)
{
  twf_pose B, R;
  twf_error err;
  char *text;
  FILE *f;
  int a, b;
  enter_comma_locale();
  twf_test_tmpdir_make("check_locale_files");
  twf_test_write_file(twf_test_tmppath("b.ini"), "[base]\nlength_unit = mm\n"
                               "position = 1503.2871 -0.5 2.385\n"
                               "quaternion_wxyz = 0.5 0.5 -0.5 0.5\n");
  ck_assert_int_eq(twf_base_read(twf_test_tmppath("b.ini"), &B, &err), TWF_OK);
  assert_locale_restored();
  ck_assert(B.p[1] == twf_length_to_si(-0.5, TWF_LENGTH_MM));
  ck_assert_close(B.R[0][0], 0.0, 1e-15);

  f = fopen(twf_test_tmppath("w.ini"), "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_base_write(&B, TWF_LENGTH_M, "written under a comma locale", f, &err),
                   TWF_OK);
  ck_assert_int_eq(fclose(f), 0);
  assert_locale_restored();
  text = twf_test_slurp(twf_test_tmppath("w.ini"));
  ck_assert_msg(strstr(text, "quaternion_wxyz = 0.5 0.5 -0.5 0.5\n") != NULL, "%s", text);
  ck_assert_msg(strstr(text, "position = 1.5032871") != NULL, "%s", text);
  free(text);

  ck_assert_int_eq(twf_base_read(twf_test_tmppath("w.ini"), &R, &err), TWF_OK);
  assert_locale_restored();
  for (a = 0; a < 3; a++) {
    ck_assert_close(R.p[a], B.p[a], 1e-15);
    for (b = 0; b < 3; b++)
      ck_assert_close(R.R[a][b], B.R[a][b], 1e-15);
  }
  twf_test_tmpdir_remove();
}
END_TEST

START_TEST(test_campaign)
{
  twf_model *m;
  twf_campaign *c, *back, *semi;
  twf_error err;
  char *text;
  FILE *f;
  size_t k;
  /* The model is read in the C locale, so that this test looks at the
   * campaign reader and writer alone. */
  ck_assert_msg(comma_locale != NULL, "%s", why_none);
  twf_test_tmpdir_make("check_locale_files");
  twf_test_write_file(twf_test_tmppath("m.ini"), MODEL);
  m = read_model_ok(twf_test_tmppath("m.ini"));
  enter_comma_locale();
  twf_test_write_file(twf_test_tmppath("c.csv"),
             "# units: length=mm angle=deg\n"
             "pose,target,j1,j2,x,y,z,sigma,set\n"
             "p1,T1,0.5,-12.25,1503.2871,-0.5,2.385,0.025,fit\n"
             "p2,T1,-33.75,45.125,1200.5,10.25,-7.5,,check\n");
  c = twf_campaign_read(twf_test_tmppath("c.csv"), m, NULL, NULL, &err);
  ck_assert_msg(c != NULL, "%s:%ld: %s", err.file, err.line, err.message);
  assert_locale_restored();
  ck_assert(c->q[0] == twf_angle_to_si(0.5, TWF_ANGLE_DEG));
  ck_assert(c->meas[0].pos[2] == twf_length_to_si(2.385, TWF_LENGTH_MM));

  f = fopen(twf_test_tmppath("w.csv"), "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_campaign_write(c, m, TWF_LENGTH_MM, TWF_ANGLE_DEG, f, &err), TWF_OK);
  ck_assert_int_eq(fclose(f), 0);
  assert_locale_restored();
  text = twf_test_slurp(twf_test_tmppath("w.csv"));
  ck_assert_msg(strstr(text, ",0.5,") != NULL, "%s", text);
  free(text);

  back = twf_campaign_read(twf_test_tmppath("w.csv"), m, NULL, NULL, &err);
  ck_assert_msg(back != NULL, "%s:%ld: %s", err.file, err.line, err.message);
  ck_assert_uint_eq(back->n_poses, 2);
  ck_assert_uint_eq(back->n_meas, 2);
  for (k = 0; k < 4; k++)
    ck_assert_close(back->q[k], c->q[k], 1e-15);
  for (k = 0; k < 3; k++)
    ck_assert_close(back->meas[1].pos[k], c->meas[1].pos[k], 1e-15);
  ck_assert_close(back->meas[0].sigma, c->meas[0].sigma, 1e-15);
  ck_assert_int_eq(back->meas[1].set, TWF_SET_CHECK);

  /* The file's own decimal comma (with ';' as delimiter) is the format's,
   * not the locale's: it reads the same here as anywhere. */
  twf_test_write_file(twf_test_tmppath("s.csv"),
             "pose;target;j1;j2;x;y;z\n"
             "p1;T1;0,5;-12,25;1503,2871;-0,5;2,385\n");
  semi = twf_campaign_read(twf_test_tmppath("s.csv"), m, NULL, NULL, &err);
  ck_assert_msg(semi != NULL, "%s:%ld: %s", err.file, err.line, err.message);
  ck_assert(semi->q[0] == c->q[0]);
  ck_assert(semi->meas[0].pos[2] == c->meas[0].pos[2]);
  assert_locale_restored();

  twf_campaign_free(semi);
  twf_campaign_free(back);
  twf_campaign_free(c);
  twf_model_free(m);
  twf_test_tmpdir_remove();
}
END_TEST

/* A thread that set its own locale with uselocale gets that one back, not
 * the global one: the library switches the calling thread only, for the
 * span of the call. */
START_TEST(test_thread_locale_kept)
{
  locale_t mine;
  twf_model *m;
  twf_error err;
  FILE *f;
  char s[16];
  enter_comma_locale();
  /* duplocale rather than newlocale: glibc 2.36's newlocale leaks its
   * copy of LOCPATH, which valgrind would report. */
  mine = duplocale(LC_GLOBAL_LOCALE);
  ck_assert(mine != (locale_t)0);
  setlocale(LC_ALL, "C");
  uselocale(mine);
  snprintf(s, sizeof s, "%.1f", 0.5);
  ck_assert_str_eq(s, "0,5");
  twf_test_tmpdir_make("check_locale_files");
  twf_test_write_file(twf_test_tmppath("m.ini"), MODEL);
  m = read_model_ok(twf_test_tmppath("m.ini"));
  ck_assert(uselocale((locale_t)0) == mine);
  f = fopen(twf_test_tmppath("w.ini"), "w");
  ck_assert_ptr_nonnull(f);
  ck_assert_int_eq(twf_model_write(m, f, &err), TWF_OK);
  fclose(f);
  ck_assert(uselocale((locale_t)0) == mine);
  twf_model_free(m);
  twf_test_tmpdir_remove();
  uselocale(LC_GLOBAL_LOCALE);
  freelocale(mine);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("locale");
  TCase *tc = tcase_create("locale");
  int rc;
  find_comma_locale();
  tcase_add_test(tc, test_model_file);
  tcase_add_test(tc, test_base_file);
  tcase_add_test(tc, test_campaign);
  tcase_add_test(tc, test_thread_locale_kept);
  suite_add_tcase(s, tc);
  rc = twf_test_run(s);
  remove_dir(locpath);
  return rc;
}
