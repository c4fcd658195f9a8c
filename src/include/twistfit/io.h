/* twistfit/io.h: model files and base pose files.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_IO_H
#define TWISTFIT_IO_H

#include "twistfit/common.h"
#include "twistfit/se3.h"
#include "twistfit/model.h"
#include "twistfit/campaign.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Model files (INI, see twistfit-model(5))                            */
/* ------------------------------------------------------------------ */

/* Locale: every reader and writer of this header and of campaign.h reads
 * and writes numbers with '.' as the decimal point whatever the caller's
 * locale (a program may call setlocale(LC_ALL, "") under any locale). The
 * calling thread is switched to the "C" locale for the span of the call
 * and given its own locale back before the call returns; no other thread
 * and no global state sees a change. */

/* Read a model file. On failure returns NULL and fills err with the file,
 * line and what to do. Recoverable oddities (an axis normalised within
 * 1e-3 of unit length, ...) go to warnings. */
twf_model *twf_model_read(const char *path, twf_warnings *warnings,
                          twf_error *err);

/* How to read a model file or a base pose file; get the defaults from
 * twf_read_default_options() and change fields. */
typedef struct twf_read_options {
  /* Largest file read, bytes; default TWF_INPUT_SIZE_DEFAULT (campaign.h;
   * 0 means the default too). A larger file is refused (TWF_ERR_VALUE). */
  unsigned long long max_input_size;
  /* A URDF file (twf_model_read reads one when the name ends in .urdf or
   * a regular file's first non-blank character is '<', through
   * twf_model_read_urdf): the base and tip links of the chain; NULL (the
   * default) for the root and the one tip. Model files ignore them, with
   * a warning. */
  const char *urdf_base_link;
  const char *urdf_tip_link;
  /* The links fixed to the tip that become targets, as
   * twf_urdf_read_options.target_links (NULL: every link without children
   * fixed to the tip). */
  const char *const *urdf_target_links;
  size_t urdf_n_target_links;
} twf_read_options;

twf_read_options twf_read_default_options(void);

/* twf_model_read with options (opt NULL: the defaults); digest (may be
 * NULL) receives the size and SHA-256 of the bytes parsed (on failure
 * it is left with an empty sha256). */
twf_model *twf_model_read_with(const char *path, const twf_read_options *opt,
                               twf_warnings *warnings,
                               twf_input_digest *digest, twf_error *err);
/* Write m in axis-and-point form with full precision (17 significant
 * digits) in m's declared units, metadata included. */
twf_status twf_model_write(const twf_model *m, FILE *out, twf_error *err);


/* ------------------------------------------------------------------ */
/* Model files: limits and return codes (modelfile_read/_write.c)     */
/* ------------------------------------------------------------------ */

/* Longest line of a model file, in bytes, not counting the line end: one
 * less than what libinih's 200-byte line buffer holds with its newline and
 * NUL. The reader refuses longer lines (inih would split them silently);
 * the writer never writes one.
 *
 * twf_model_read (declared above) returns NULL with err->status:
 *   TWF_ERR_IO         the file cannot be opened or read (line 0);
 *   TWF_ERR_SYNTAX     a malformed line, section header or name, a line
 *                      longer than TWF_MODEL_LINE_MAX (reading stops at a
 *                      line longer than TWF_CAMPAIGN_LINE_MAX), a NUL
 *                      byte, joints in different
 *                      forms, [home] in a DH file or [flange] in an
 *                      axis-and-point file;
 *   TWF_ERR_UNKNOWN    an unknown section, key or joint type;
 *   TWF_ERR_DUPLICATE  a key, section, joint or target name given twice,
 *                      two rotation forms or two joint geometries;
 *   TWF_ERR_MISSING    no [robot], no joint, no [home], a missing type,
 *                      axis, point, position or rotation, an empty file;
 *   TWF_ERR_VALUE      a file larger than the input size limit (line 0),
 *                      a value that is not a finite number, a wrong count,
 *                      a zero or non-unit axis (beyond 1e-3), min > max,
 *                      a zero scale, a rotation not orthonormal to 1e-6 or
 *                      a reflection, a quaternion norm beyond 1e-6 of 1;
 *   TWF_ERR_UNITS      an unknown length_unit or angle_unit;
 *   TWF_ERR_NOMEM      out of memory.
 * err->line is the 1-based line concerned (the section header for a
 * missing key, 0 for what concerns the whole file), err->column the
 * 1-based field of a bad number, else 0. warnings (NULL: discard) receive
 * axes normalised from within 1e-3 of unit length.
 *
 * twf_model_write (declared above) returns TWF_OK, TWF_ERR_INVALID when m
 * cannot be written faithfully (a non-finite value, an invalid or repeated
 * name, a revolute twist with screw pitch, a home rotation that is not
 * one, a metadata line longer than TWF_MODEL_LINE_MAX), TWF_ERR_IO when
 * the stream fails, TWF_ERR_NOMEM. Nothing is written unless m passed the
 * checks. Metadata values are put on one line: control characters (line
 * ends included) become spaces, blanks before ';' are dropped so that the
 * reader does not take the rest for a comment, and the ends are trimmed. */
#define TWF_MODEL_LINE_MAX 198


/* ------------------------------------------------------------------ */
/* Base pose files (see twistfit-model(5), "BASE POSE FILES")          */
/* ------------------------------------------------------------------ */

/* Read a base pose file: the robot base frame in the tracker frame, one
 * [base] section with length_unit, position and quaternion_wxyz. NULL
 * rules and errors as twf_model_read (file, line and a hint). */
twf_status twf_base_read(const char *path, twf_pose *base_in_tracker,
                         twf_error *err);
/* twf_base_read with options (opt NULL: the defaults) and the digest of
 * the bytes parsed (may be NULL), as twf_model_read_with. */
twf_status twf_base_read_with(const char *path, const twf_read_options *opt,
                              twf_pose *base_in_tracker,
                              twf_input_digest *digest, twf_error *err);
/* Write base_in_tracker in that form with 17 significant digits, position
 * in length unit u; comment (may be NULL) becomes a leading ';' line. */
twf_status twf_base_write(const twf_pose *base_in_tracker, twf_length_unit u,
                          const char *comment, FILE *out, twf_error *err);

/* Base pose files of several instrument stations: one section
 * "[station NAME]" per station, each with the keys of [base] (the robot
 * base frame in the frame of the instrument at that station). Write the n
 * poses bases[] of stations names[] (n >= 2; for n = 1 the file is
 * twf_base_write's, byte for byte, and names may be NULL). TWF_ERR_INVALID
 * for a name that twf_station_name_check refuses, TWF_ERR_IO. */
twf_status twf_base_write_stations(const twf_pose *bases, const char (*names)[TWF_NAME_MAX], size_t n,
                                   twf_length_unit u, const char *comment, FILE *out,
                                   twf_error *err);
/* Read a base pose file of either form into bases[0..max) and names[]
 * (file order) with *n the count: a [base] file gives *n = 1 and
 * names[0] "". More than max sections, a repeated station, a station name
 * refused by twf_station_name_check, [base] beside [station] sections and
 * a section without all three keys are errors with the line. */
twf_status twf_base_read_stations(const char *path, const twf_read_options *opt, twf_pose *bases,
                                  char (*names)[TWF_NAME_MAX], size_t max, size_t *n,
                                  twf_input_digest *digest, twf_error *err);


#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_IO_H */
