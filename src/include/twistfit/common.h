/* twistfit/common.h: status codes, error reports, warnings, units, version.
 * Part of the public interface of libtwistfit; include <twistfit.h>,
 * whose opening comment states the rules (units, frames, ownership,
 * errors) that hold for every declaration here. */
#ifndef TWISTFIT_COMMON_H
#define TWISTFIT_COMMON_H

#include <stddef.h>
#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------ */
/* Status codes and error reports                                      */
/* ------------------------------------------------------------------ */

/* Stable values: the command line maps them to exit statuses. */
typedef enum twf_status {
  TWF_OK = 0,
  TWF_ERR_NOMEM = 1,      /* out of memory */
  TWF_ERR_IO = 2,         /* a file could not be opened, read or written */
  TWF_ERR_SYNTAX = 3,     /* the input's form is wrong (section, key, field) */
  TWF_ERR_VALUE = 4,      /* a value is non-numeric, non-finite or out of range */
  TWF_ERR_MISSING = 5,    /* something required is absent */
  TWF_ERR_DUPLICATE = 6,  /* something appears twice */
  TWF_ERR_UNKNOWN = 7,    /* a name the model or format does not know */
  TWF_ERR_UNITS = 8,      /* a unit is not recognised */
  TWF_ERR_INVALID = 9,    /* an argument of the call is invalid */
  TWF_ERR_DEGENERATE = 10,/* data too poor to determine the answer */
  TWF_ERR_SINGULAR = 11,  /* a linear system is singular */
  TWF_ERR_DIVERGED = 12,  /* an iteration diverged or did not converge */
  TWF_ERR_LIMIT = 13      /* a joint value lies outside the model's limits */
} twf_status;

#define TWF_ERROR_TEXT_MAX 512
#define TWF_ERROR_FILE_MAX 256

typedef struct twf_error {
  twf_status status;
  char file[TWF_ERROR_FILE_MAX]; /* input file concerned, "" if none */
  long line;                     /* 1-based line in file, 0 if unknown */
  long column;                   /* 1-based column (field), 0 if unknown */
  char message[TWF_ERROR_TEXT_MAX]; /* what is wrong, one line, no trailing period */
  char hint[TWF_ERROR_TEXT_MAX];    /* what to do about it, "" if nothing useful */
} twf_error;

/* Short English name of a status ("out of memory", ...). Never NULL. */
const char *twf_strerror(twf_status status);

/* Reset err to TWF_OK with empty fields. err may be NULL. */
void twf_error_clear(twf_error *err);

/* Fill err (may be NULL) and return status. file may be NULL; hint may be
 * NULL; fmt is a printf format for the message. */
twf_status twf_error_set(twf_error *err, twf_status status, const char *file,
                         long line, long column, const char *hint,
                         const char *fmt, ...)
    __attribute__((format(printf, 7, 8)));

/* Warnings collected by readers and solvers (never printed by the library).
 * Initialise with twf_warnings_init, release with twf_warnings_clear.
 * Wherever a function takes a twf_warnings *, NULL means "discard". */
typedef struct twf_warning {
  char file[TWF_ERROR_FILE_MAX];
  long line;
  long column;
  char message[TWF_ERROR_TEXT_MAX];
} twf_warning;

typedef struct twf_warnings {
  size_t count;
  size_t capacity;
  twf_warning *items;
} twf_warnings;

void twf_warnings_init(twf_warnings *w);
void twf_warnings_clear(twf_warnings *w);
/* Append one warning; silently dropped when w is NULL or memory is short. */
void twf_warnings_add(twf_warnings *w, const char *file, long line,
                      long column, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

/* ------------------------------------------------------------------ */
/* Units                                                               */
/* ------------------------------------------------------------------ */

typedef enum twf_length_unit {
  TWF_LENGTH_MM = 0,  /* millimetre (the default) */
  TWF_LENGTH_M,       /* metre */
  TWF_LENGTH_UM,      /* micrometre */
  TWF_LENGTH_IN       /* inch, 25.4 mm exactly */
} twf_length_unit;

typedef enum twf_angle_unit {
  TWF_ANGLE_DEG = 0,  /* degree (the default) */
  TWF_ANGLE_RAD,      /* radian */
  TWF_ANGLE_MRAD      /* milliradian */
} twf_angle_unit;

/* Parse a unit name ("mm", "m", "um", "in"; "deg", "rad", "mrad"; a few
 * spelled-out synonyms). Return TWF_ERR_UNITS when not recognised. */
twf_status twf_length_unit_parse(const char *name, twf_length_unit *out);
twf_status twf_angle_unit_parse(const char *name, twf_angle_unit *out);
/* Canonical short name, as accepted by the parsers. */
const char *twf_length_unit_name(twf_length_unit u);
const char *twf_angle_unit_name(twf_angle_unit u);
/* SI value of one unit: metres per unit, radians per unit. */
double twf_length_unit_si(twf_length_unit u);
double twf_angle_unit_si(twf_angle_unit u);
/* Convert a value in unit u to SI (metres, radians) and back: the one
 * conversion that every reader and writer of the library uses, v times
 * the unit's SI value on the way in and si divided by it on the way out
 * (the arithmetic of x / twf_length_unit_si(u), so that reports that
 * divide by the SI value agree with the files bit for bit). */
double twf_length_to_si(double v, twf_length_unit u);
double twf_length_from_si(double si, twf_length_unit u);
double twf_angle_to_si(double v, twf_angle_unit u);
double twf_angle_from_si(double si, twf_angle_unit u);


/* ------------------------------------------------------------------ */
/* Version                                                             */
/* ------------------------------------------------------------------ */

/* The library's version string, e.g. "0.1.0". */
const char *twf_version(void);

#ifdef __cplusplus
}
#endif

#endif /* TWISTFIT_COMMON_H */
