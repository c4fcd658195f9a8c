/* svgchart.h: the charts of the HTML report as inline SVG: tick steps,
 * scales from data to pixels, the escaping of every text placed in HTML
 * or SVG, and the chart kinds the report draws (lines and steps, scatter,
 * horizontal bars with error bars, log-scale points, a heat map). The
 * module knows nothing of calibration: it draws numbers it is given.
 *
 * Every chart is one <svg> element with a fixed viewBox (width x height in
 * px); everything drawn, text included (estimated at SVGC_CHAR_EM of the
 * font size per character), stays inside it: labels too long for their
 * room are cut with an ellipsis. Series are told apart by marker shape and
 * dash as well as by colour (the Okabe-Ito palette), so that grey print
 * and the common colour-vision deficiencies keep them apart. */
#ifndef TWF_SVGCHART_H
#define TWF_SVGCHART_H

#include <stddef.h>
#include <stdio.h>

/* Width of one character as a fraction of the font size: a generous
 * estimate for a sans-serif face (digits are about 0.55 em), used to keep
 * text inside the viewBox. */
#define SVGC_CHAR_EM 0.62
#define SVGC_FONT_PX 11.0
#define SVGC_TITLE_PX 13.0
#define SVGC_TICKS_MAX 64

/* Write s with & < > " ' replaced by entities (the one escaping function
 * of the report; s NULL writes nothing). */
void svgc_escape(FILE *fp, const char *s);

/* Ticks of an axis: v[0..n) ascending; lo and hi the axis range (the
 * ticks' ends, which cover the data); step the linear step (0 for log). */
typedef struct svgc_ticks {
  size_t n;
  double v[SVGC_TICKS_MAX];
  double lo, hi, step;
  int log;
} svgc_ticks;

/* Linear ticks from the 1-2-5 ladder: the step is the smallest 1, 2 or 5
 * times a power of ten that is at least (hi - lo) / target, and the range
 * is widened to whole steps (so about target intervals, never more than
 * target + 2).
 * A zero-width range is widened around its value (to [-1, 1] at 0).
 * Returns 0, or -1 for a non-finite bound or target < 2. */
int svgc_ticks_linear(double lo, double hi, size_t target, svgc_ticks *t);
/* Decade ticks 10^k covering [lo, hi] (both > 0; lo == hi widens by a
 * decade each side). Returns 0, or -1 for a bound <= 0 or not finite. */
int svgc_ticks_log(double lo, double hi, svgc_ticks *t);
/* A tick label: the shortest %g form that shows the step's decimals
 * (0.2, 1, 0.005), "1e-06" style for log ticks; buf of n >= 32. */
const char *svgc_tick_label(const svgc_ticks *t, double v, char *buf, size_t n);

/* A scale: [d0, d1] of the data onto [p0, p1] pixels, linear or log10. */
typedef struct svgc_scale {
  double d0, d1, p0, p1;
  int log;
} svgc_scale;
double svgc_map(const svgc_scale *s, double v);

/* Series styles: colour, marker and dash by index (cycled). */
#define SVGC_STYLES 6
const char *svgc_style_colour(size_t style);

typedef enum svgc_kind {
  SVGC_LINE,    /* polyline through the points in order */
  SVGC_STEP,    /* steps: horizontal then vertical (a cumulative distribution) */
  SVGC_SCATTER  /* markers only */
} svgc_kind;

typedef struct svgc_series {
  const char *name; /* legend text (NULL: no legend entry) */
  svgc_kind kind;
  size_t style;
  size_t n;
  const double *x, *y; /* NaN points are skipped */
} svgc_series;

/* A marked level: a line across the plot at value v of the x axis
 * (vertical) or the y axis (horizontal), dashed, with a label. */
typedef struct svgc_mark {
  double v;
  int vertical;
  const char *label;
} svgc_mark;

typedef struct svgc_axis {
  const char *title; /* with its unit, e.g. "error after (mm)" */
  double lo, hi;     /* NaN: from the data */
  int log;
  int zero;          /* linear: include 0 in the range */
} svgc_axis;

typedef struct svgc_xy_chart {
  const char *title;
  double width, height; /* viewBox, px */
  svgc_axis x, y;
  size_t n_series;
  const svgc_series *series;
  size_t n_marks;
  const svgc_mark *marks;
} svgc_xy_chart;

/* An x-y chart: axes with ticks and titles, the series, the marks and a
 * legend below the plot. Returns 0, or -1 for bad sizes or no finite
 * data on an axis that needs it. */
int svgc_xy(FILE *fp, const svgc_xy_chart *c);

/* Horizontal bars: one row per label, a bar from 0 to value[k] and an
 * error bar of +- err[k] (NaN: none; a NaN value draws "n/d"). */
typedef struct svgc_bar_chart {
  const char *title;
  double width;          /* the height follows from the rows */
  const char *axis_title; /* with its unit */
  size_t n;
  const char *const *labels;
  const double *value, *err;
} svgc_bar_chart;
int svgc_bars(FILE *fp, const svgc_bar_chart *c);
/* The viewBox height of a bar chart of n rows. */
double svgc_bars_height(size_t n);

/* A heat map of an n x n matrix of values in [-1, 1] (row-major; NaN a
 * hatched cell), with the labels on the left and on top (rotated) and a
 * colour key. Diverging blue-white-red palette whose lightness falls with
 * |value| on both sides, so grey print shows the size, the hue the sign. */
typedef struct svgc_heatmap {
  const char *title;
  size_t n;
  const char *const *labels;
  const double *m;
} svgc_heatmap;
int svgc_heat(FILE *fp, const svgc_heatmap *h);
/* The colour of value v in [-1, 1] (clamped) as "#rrggbb" into buf[8]. */
const char *svgc_diverging(double v, char buf[8]);

#endif
