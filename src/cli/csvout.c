/* csvout.c: CSV output through libcsv's writer (text fields are quoted by
 * csv_fwrite; numbers are plain). */
#include "config.h"
#include "cli.h"

#include <csv.h>
#include <math.h>
#include <string.h>

void cli_csv_init(cli_csv *c, FILE *fp)
{
  c->fp = fp;
  c->fields_in_row = 0;
}

static void separator(cli_csv *c)
{
  if (c->fields_in_row++ > 0)
    fputc(',', c->fp);
}

void cli_csv_text(cli_csv *c, const char *text)
{
  separator(c);
  csv_fwrite(c->fp, text, strlen(text));
}

void cli_csv_number(cli_csv *c, double value)
{
  separator(c);
  if (isfinite(value))
    fprintf(c->fp, "%.12g", value);
}

void cli_csv_end_row(cli_csv *c)
{
  fputc('\n', c->fp);
  c->fields_in_row = 0;
}
