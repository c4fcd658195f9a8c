/* check_basefile.c: the base pose file: write/read round trip and every
 * refusal with its status and line. Round trip and refusals are checked
 * against the format of twistfit-model(5), BASE POSE FILES (no outside
 * reference is needed: common practice, no source). */
#include "testutil.h"
#include "twistfit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char path[64];

static void write_text(const char *text)
{
  FILE *fp;
  int fd;
  strcpy(path, "/tmp/twf-base-XXXXXX");
  fd = mkstemp(path);
  ck_assert_int_ge(fd, 0);
  fp = fdopen(fd, "w");
  fputs(text, fp);
  fclose(fp);
}

START_TEST(test_roundtrip)
{
  static const twf_length_unit units[] = { TWF_LENGTH_MM, TWF_LENGTH_M, TWF_LENGTH_UM, TWF_LENGTH_IN };
  const double S[6] = { 0.31, -2.52, 0.79, 0, 0, 0 };
  twf_pose B, R;
  twf_error err;
  size_t u;
  int a, b;
  twf_se3_exp(S, 1.0, &B);
  B.p[0] = 3.2171234;
  B.p[1] = -1.8453;
  B.p[2] = 0.7341;
  for (u = 0; u < 4; u++) {
    FILE *fp;
    int fd;
    strcpy(path, "/tmp/twf-base-XXXXXX");
    fd = mkstemp(path);
    fp = fdopen(fd, "w");
    ck_assert_int_eq(twf_base_write(&B, units[u], "a comment", fp, &err), TWF_OK);
    fclose(fp);
    ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_OK);
    for (a = 0; a < 3; a++) {
      ck_assert_close(R.p[a], B.p[a], 1e-15);
      for (b = 0; b < 3; b++)
        ck_assert_close(R.R[a][b], B.R[a][b], 1e-15);
    }
    unlink(path);
  }
}
END_TEST

START_TEST(test_indented_and_comments)
{
  twf_pose R;
  twf_error err;
  write_text("; base\n[base]\n  length_unit = m\n\tposition = 1 2 3\n"
             "  quaternion_wxyz = 1 0 0 0\n");
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_OK);
  ck_assert_close(R.p[1], 2.0, 1e-15);
  unlink(path);
}
END_TEST

static const struct {
  const char *text;
  twf_status status;
  long line;
  const char *fragment;
} bad[] = {
  { "[base]\nlength_unit = mm\nposition = 1 2 3\n", TWF_ERR_MISSING, 0, "incomplete" },
  { "[base]\nlength_unit = mm\nposition = 1 2 3\nquaternion_wxyz = 1 0 0 0.1\n", TWF_ERR_VALUE, 4, "has norm 1.00498756, not 1 within 1e-06" },
  { "[base]\nlength_unit = mm\nposition = 1 2\nquaternion_wxyz = 1 0 0 0\n", TWF_ERR_VALUE, 3, "bad position" },
  { "[base]\nlength_unit = mm\nposition = 1 2 nan\nquaternion_wxyz = 1 0 0 0\n", TWF_ERR_VALUE, 3, "bad position" },
  { "[base]\nlength_unit = furlong\n", TWF_ERR_UNITS, 2, "unknown length unit" },
  { "[base]\nlength_unit = mm\nlength_unit = m\n", TWF_ERR_DUPLICATE, 3, "duplicate key" },
  { "[base]\ncolour = red\n", TWF_ERR_UNKNOWN, 2, "unknown key" },
  { "[tool]\nlength_unit = mm\n", TWF_ERR_UNKNOWN, 1, "unknown section" },
  { "[base]\n[base]\n", TWF_ERR_DUPLICATE, 2, "duplicate section" },
  { "length_unit = mm\n", TWF_ERR_SYNTAX, 0, "outside [base]" },
  { "[base]\nlength_unit = m\nposition = 1 2e3 3\nquaternion_wxyz = 1 0 0 0\n", TWF_ERR_VALUE, 3,
    "position: 2000 m lies beyond 1000 m" },
};

START_TEST(test_bad_files)
{
  size_t i;
  for (i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    twf_pose R;
    twf_error err;
    write_text(bad[i].text);
    ck_assert_int_eq(twf_base_read(path, &R, &err), bad[i].status);
    ck_assert_msg(strstr(err.message, bad[i].fragment) != NULL, "case %zu: '%s'", i, err.message);
    if (bad[i].line > 0)
      ck_assert_int_eq(err.line, bad[i].line);
    ck_assert_msg(err.hint[0] != '\0', "case %zu has no hint", i);
    unlink(path);
  }
  {
    twf_pose R;
    twf_error err;
    ck_assert_int_eq(twf_base_read("/nonexistent/base.ini", &R, &err), TWF_ERR_IO);
  }
}
END_TEST

/* The base pose file is read through the model file's strict INI layer:
 * a line longer than libinih's buffer, which inih would split silently,
 * and a NUL byte, which would cut a line short, are refused at their
 * line; a byte order mark and CR LF line ends are accepted. */
START_TEST(test_strict_lines)
{
  static const char good[] = "\xEF\xBB\xBF[base]\r\nlength_unit = mm\r\n"
                             "position = 1 2 3\r\nquaternion_wxyz = 1 0 0 0\r\n";
  static const char nul[] = "[base]\nlength_unit = mm\nposition = 1 2\0 3\n"
                            "quaternion_wxyz = 1 0 0 0\n";
  char text[512];
  twf_pose R;
  twf_error err;
  FILE *fp;
  int fd;

  write_text(good);
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_OK);
  ck_assert_close(R.p[2], 0.003, 1e-15);
  unlink(path);

  /* 199 characters without the line end: one more than the limit. */
  snprintf(text, sizeof text, "[base]\nlength_unit = mm\nposition = 1 2 3%*s\n"
           "quaternion_wxyz = 1 0 0 0\n", 199 - 16, "");
  write_text(text);
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 3);
  ck_assert_str_eq(err.message, "line too long");
  unlink(path);
  /* 198 characters fit. */
  snprintf(text, sizeof text, "[base]\nlength_unit = mm\nposition = 1 2 3%*s\n"
           "quaternion_wxyz = 1 0 0 0\n", 198 - 16, "");
  write_text(text);
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_OK);
  unlink(path);

  strcpy(path, "/tmp/twf-base-XXXXXX");
  fd = mkstemp(path);
  ck_assert_int_ge(fd, 0);
  fp = fdopen(fd, "w");
  fwrite(nul, 1, sizeof nul - 1, fp);
  fclose(fp);
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 3);
  ck_assert_ptr_nonnull(strstr(err.message, "NUL"));
  ck_assert_ptr_nonnull(strstr(err.hint, "base pose file"));
  unlink(path);

  /* An endless line stops the reading at the read stage's limit. */
  strcpy(path, "/tmp/twf-base-XXXXXX");
  fd = mkstemp(path);
  ck_assert_int_ge(fd, 0);
  fp = fdopen(fd, "w");
  fputs("[base]\nposition = 1", fp);
  for (size_t k = 0; k < 2 * (size_t)TWF_CAMPAIGN_LINE_MAX; k++)
    fputc('0', fp);
  fclose(fp);
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_ERR_SYNTAX);
  ck_assert_int_eq(err.line, 2);
  ck_assert_ptr_nonnull(strstr(err.message, "longer than 65536 characters"));
  unlink(path);
}
END_TEST

/* twf_base_read_with: the size limit. */
START_TEST(test_size_limit)
{
  static const char text[] = "[base]\nlength_unit = mm\nposition = 1 2 3\n"
                             "quaternion_wxyz = 1 0 0 0\n";
  twf_read_options o = twf_read_default_options();
  twf_input_digest d;
  twf_pose R;
  twf_error err;
  write_text(text);
  o.max_input_size = sizeof text - 1;
  ck_assert_int_eq(twf_base_read_with(path, &o, &R, &d, &err), TWF_OK);
  /* the digest of the bytes parsed (reference: Python's hashlib) */
  ck_assert_str_eq(d.sha256, "a14586614f9f5b9321acf8d081c64b87a96a82ab54fa118211904837eaa85159");
  ck_assert(d.size == sizeof text - 1);
  o.max_input_size = sizeof text - 2;
  ck_assert_int_eq(twf_base_read_with(path, &o, &R, &d, &err), TWF_ERR_VALUE);
  ck_assert_ptr_nonnull(strstr(err.message, "larger than the input size limit"));
  ck_assert_str_eq(d.sha256, "");
  ck_assert_int_eq(twf_base_read_with(NULL, &o, &R, NULL, &err), TWF_ERR_INVALID);
  unlink(path);
}
END_TEST

/* The reader converts with units.c: 3.1 mm is a value where 3.1 / 1e3
 * and 3.1 * 1e-3 differ in the last bit. */
START_TEST(test_one_unit_conversion)
{
  twf_pose R;
  twf_error err;
  write_text("[base]\nlength_unit = mm\nposition = 3.1 0 -3.1\nquaternion_wxyz = 1 0 0 0\n");
  ck_assert_int_eq(twf_base_read(path, &R, &err), TWF_OK);
  ck_assert(R.p[0] == twf_length_to_si(3.1, TWF_LENGTH_MM));
  ck_assert(R.p[2] == twf_length_to_si(-3.1, TWF_LENGTH_MM));
  unlink(path);
}
END_TEST

int main(void)
{
  Suite *s = suite_create("basefile");
  TCase *tc = tcase_create("basefile");
  tcase_add_test(tc, test_roundtrip);
  tcase_add_test(tc, test_indented_and_comments);
  tcase_add_test(tc, test_bad_files);
  tcase_add_test(tc, test_strict_lines);
  tcase_add_test(tc, test_one_unit_conversion);
  tcase_add_test(tc, test_size_limit);
  suite_add_tcase(s, tc);
  return twf_test_run(s);
}
