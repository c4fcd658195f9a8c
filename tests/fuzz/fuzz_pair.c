/* fuzz_pair.c: the two-file campaign reader (twf_campaign_read_pair) and
 * the joints file alone (twf_campaign_read_joints). One input holds both
 * files: the joints file, a line "%%", the points file (without that line
 * the input is the joints file and the points file is empty). */
#include "fuzz.h"

#include <string.h>

/* The line that separates the two files; in the dictionary too. */
static const char separator[] = "\n%%\n";

void twf_fuzz_pair(const uint8_t *data, size_t size)
{
  const twf_model *m = twf_fuzz_arm(0);
  size_t cut = size, rest = size;
  const char *jpath, *ppath;
  twf_warnings w;
  twf_error err;
  twf_campaign *c;
  for (size_t i = 0; i + sizeof separator - 1 <= size; i++)
    if (memcmp(data + i, separator, sizeof separator - 1) == 0) {
      cut = i + 1; /* the joints file keeps its last line end */
      rest = i + sizeof separator - 1;
      break;
    }
  jpath = twf_fuzz_file(0, data, cut);
  ppath = twf_fuzz_file(1, data + rest, size - rest);
  if (jpath == NULL || ppath == NULL)
    return;

  twf_warnings_init(&w);
  twf_error_clear(&err);
  c = twf_campaign_read_pair(jpath, ppath, m, NULL, &w, &err);
  twf_warnings_clear(&w);
  if (c == NULL) {
    twf_fuzz_check_error(&err, 1);
    FUZZ_CHECK(strcmp(err.file, jpath) == 0 || strcmp(err.file, ppath) == 0 ||
               err.status == TWF_ERR_NOMEM);
  } else {
    twf_fuzz_check_no_nul(data, size);
    twf_fuzz_check_campaign(c, m, 1);
    twf_campaign_free(c);
  }

  twf_warnings_init(&w);
  twf_error_clear(&err);
  c = twf_campaign_read_joints(jpath, m, NULL, &w, &err);
  twf_warnings_clear(&w);
  if (c == NULL) {
    twf_fuzz_check_error(&err, 1);
  } else {
    twf_fuzz_check_no_nul(data, cut);
    twf_fuzz_check_campaign(c, m, 0);
    twf_campaign_free(c);
  }
}

#ifdef TWF_FUZZER
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
  twf_fuzz_pair(data, size);
  return 0;
}
#endif
