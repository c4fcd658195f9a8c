/* fuzz.h: what the reader harnesses share. Each harness is a function that
 * takes one input, hands it to a reader through the public interface as a
 * file, and checks what comes back. The same functions run under libFuzzer
 * (build.sh, TWF_FUZZER defined: a failed check aborts, so that libFuzzer
 * keeps the input) and in the replay program of make check (replay.c: a
 * failed check is counted and the next input follows). */
#ifndef TWF_FUZZ_H
#define TWF_FUZZ_H

#include <stddef.h>
#include <stdint.h>

#include "twistfit.h"

/* The harnesses, one per reader (fuzz_<name>.c). */
void twf_fuzz_model(const uint8_t *data, size_t size);
void twf_fuzz_base(const uint8_t *data, size_t size);
void twf_fuzz_campaign(const uint8_t *data, size_t size);
void twf_fuzz_pair(const uint8_t *data, size_t size);
void twf_fuzz_urdf(const uint8_t *data, size_t size);

/* Report a broken expectation (file, line, the condition's text). */
void twf_fuzz_fail(const char *file, int line, const char *what);
/* Number of failures reported so far (replay only; a fuzzer aborts). */
extern unsigned long twf_fuzz_failures;

/* Check a condition; on failure report it and leave the calling function,
 * which must return void: carrying on with a broken result would only
 * pile up follow-on reports. */
#define FUZZ_CHECK(cond)                                     \
  do {                                                       \
    if (!(cond)) {                                           \
      twf_fuzz_fail(__FILE__, __LINE__, #cond);              \
      return;                                                \
    }                                                        \
  } while (0)

/* The readers take paths: put data in the temporary file of slot (0 or 1,
 * one per file of the two-file form) and return its path. The files are
 * made once per process and rewritten for each input, so that a long run
 * does not create and remove millions of files. NULL on failure (reported
 * and counted). */
const char *twf_fuzz_file(int slot, const uint8_t *data, size_t size);

/* 1 when the check named check is to be skipped: TWF_FUZZ_TOLERATE names
 * them, comma-separated. run.sh sets it for an open bug that a fuzzer
 * would otherwise hit within seconds, so that a run can look past it; the
 * replay of make check leaves it unset, and there the bug's regression
 * input is an expected failure (known.txt). Names: "control-chars" (a
 * control character in an error report or in an accepted name or value),
 * "nul-accepted" (see twf_fuzz_check_no_nul), "nonfinite-model" (an accepted
 * model with an infinite or NaN value: not checked further),
 * "write-overflow" (no round trip of a base pose beyond 1e300 m or of a
 * model with a length beyond 1e6 m), "name-comment" (a model name with ';'
 * or '#' is not compared after the round trip). */
int twf_fuzz_tolerated(const char *check);

/* A file with a NUL byte is not text: every reader must refuse it, not read
 * up to the NUL. Fails the check when data holds one and the reader
 * accepted it (tolerated as "nul-accepted"). */
void twf_fuzz_check_no_nul(const uint8_t *data, size_t size);

/* Checks every reader's error report must pass. */
void twf_fuzz_check_error(const twf_error *e, int need_hint);
/* Checks on what a reader accepted. */
void twf_fuzz_check_model(const twf_model *m);
void twf_fuzz_check_campaign(const twf_campaign *c, const twf_model *m,
                             int need_meas);

/* Nominal models for the campaign readers, made once (tests/arms.c):
 * tf6s (6 revolute joints) and tf4p (one prismatic joint). */
const twf_model *twf_fuzz_arm(int which);

#endif
