/* svgchart.c: tick steps, scales and the chart kinds of the HTML report
 * (svgchart.h). Our own small module: see DEVELOPERS.md for why no
 * library is used. */
#include "svgchart.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void svgc_escape(FILE *fp, const char *s)
{
  if (s == NULL)
    return;
  for (; *s != '\0'; s++) {
    switch (*s) {
    case '&': fputs("&amp;", fp); break;
    case '<': fputs("&lt;", fp); break;
    case '>': fputs("&gt;", fp); break;
    case '"': fputs("&quot;", fp); break;
    case '\'': fputs("&#39;", fp); break;
    default: fputc(*s, fp); break;
    }
  }
}

/* ------------------------------------------------------------ ticks */

int svgc_ticks_linear(double lo, double hi, size_t target, svgc_ticks *t)
{
  double span, raw, mag, step = 0, a, b;
  static const double ladder[3] = { 1.0, 2.0, 5.0 };
  size_t k, n;
  memset(t, 0, sizeof *t);
  if (!isfinite(lo) || !isfinite(hi) || target < 2)
    return -1;
  if (lo > hi) {
    double x = lo;
    lo = hi;
    hi = x;
  }
  if (hi == lo) {
    double w = lo == 0.0 ? 1.0 : 0.5 * fabs(lo);
    lo -= w;
    hi += w;
  }
  span = hi - lo;
  raw = span / (double)target;
  mag = pow(10.0, floor(log10(raw)));
  for (k = 0; k < 4; k++) {
    step = (k < 3 ? ladder[k] : 10.0) * mag;
    /* a relative slack so that 0.2 covers 0..1 in five steps despite rounding */
    if (step >= raw * (1.0 - 1e-9))
      break;
  }
  a = floor(lo / step + 1e-9) * step;
  b = ceil(hi / step - 1e-9) * step;
  n = (size_t)llround((b - a) / step) + 1;
  if (n > SVGC_TICKS_MAX)
    return -1;
  for (k = 0; k < n; k++) {
    double v = a + (double)k * step;
    t->v[k] = fabs(v) < 1e-9 * step ? 0.0 : v; /* no -0 or 1e-17 at zero */
  }
  t->n = n;
  t->lo = t->v[0];
  t->hi = t->v[n - 1];
  t->step = step;
  t->log = 0;
  return 0;
}

int svgc_ticks_log(double lo, double hi, svgc_ticks *t)
{
  double a, b;
  int k0, k1, k;
  memset(t, 0, sizeof *t);
  if (!isfinite(lo) || !isfinite(hi) || lo <= 0 || hi <= 0)
    return -1;
  if (lo > hi) {
    double x = lo;
    lo = hi;
    hi = x;
  }
  a = floor(log10(lo) + 1e-9);
  b = ceil(log10(hi) - 1e-9);
  if (b <= a) {
    a -= 1.0;
    b += 1.0;
  }
  if (b - a + 1 > SVGC_TICKS_MAX || a < -300 || b > 300)
    return -1;
  k0 = (int)a;
  k1 = (int)b;
  for (k = k0; k <= k1; k++)
    t->v[t->n++] = pow(10.0, (double)k);
  t->lo = t->v[0];
  t->hi = t->v[t->n - 1];
  t->log = 1;
  return 0;
}

const char *svgc_tick_label(const svgc_ticks *t, double v, char *buf, size_t n)
{
  if (t->log) {
    double e = round(log10(v));
    if (e >= -3 && e <= 4)
      snprintf(buf, n, "%g", pow(10.0, e));
    else
      snprintf(buf, n, "1e%d", (int)e);
    return buf;
  }
  {
    /* decimals of the step: 0.005 -> 3, 0.2 -> 1, 5 -> 0 */
    int dec = 0;
    double s = t->step;
    while (dec < 12 && fabs(s * pow(10.0, dec) - round(s * pow(10.0, dec))) > 1e-6 * s * pow(10.0, dec))
      dec++;
    if (v == 0 && (s < 1e-4 || s >= 1e6))
      snprintf(buf, n, "0");
    else if (fabs(v) >= 1e6 || s < 1e-4)
      snprintf(buf, n, "%.3g", v);
    else
      snprintf(buf, n, "%.*f", dec, v);
  }
  return buf;
}

double svgc_map(const svgc_scale *s, double v)
{
  double f;
  if (s->log)
    f = (log10(v) - log10(s->d0)) / (log10(s->d1) - log10(s->d0));
  else
    f = (v - s->d0) / (s->d1 - s->d0);
  return s->p0 + f * (s->p1 - s->p0);
}

/* ------------------------------------------------------------ text */

static const char *const colours[SVGC_STYLES] = {
  /* Okabe and Ito (2008), "Color Universal Design": blue, vermillion,
   * bluish green, orange, reddish purple, black */
  "#0072B2", "#D55E00", "#009E73", "#E69F00", "#CC79A7", "#000000"
};
static const char *const dashes[SVGC_STYLES] = { "", "6 3", "2 2", "8 3 2 3", "4 4", "1 3" };

const char *svgc_style_colour(size_t style) { return colours[style % SVGC_STYLES]; }

/* Code points of a UTF-8 string (continuation bytes not counted). */
static size_t text_chars(const char *s)
{
  size_t n = 0;
  for (; *s != '\0'; s++)
    if (((unsigned char)*s & 0xC0) != 0x80)
      n++;
  return n;
}

static double text_width(const char *s, double px) { return (double)text_chars(s) * px * SVGC_CHAR_EM; }

/* A text element; the text is cut with an ellipsis to at most maxw px.
 * extra: further attributes (a transform), or NULL. */
static void put_text(FILE *fp, double x, double y, const char *anchor, double px, int bold, double maxw,
                     const char *extra, const char *s)
{
  size_t room = maxw > 0 ? (size_t)floor(maxw / (px * SVGC_CHAR_EM)) : 0;
  fprintf(fp, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"%s\" font-size=\"%.0f\"%s%s%s>", x, y, anchor, px,
          bold ? " font-weight=\"bold\"" : "", extra ? " " : "", extra ? extra : "");
  if (text_chars(s) <= room) {
    svgc_escape(fp, s);
  } else if (room >= 2) {
    /* copy room - 1 code points, then the ellipsis */
    char *cut = malloc(strlen(s) + 1);
    size_t i = 0, cp = 0;
    if (cut != NULL) {
      for (; s[i] != '\0'; i++) {
        if (((unsigned char)s[i] & 0xC0) != 0x80 && cp++ == room - 1)
          break;
        cut[i] = s[i];
      }
      cut[i] = '\0';
      svgc_escape(fp, cut);
      fputs("\xE2\x80\xA6", fp);
      free(cut);
    }
  }
  fputs("</text>\n", fp);
}

static void svg_open(FILE *fp, double w, double h, const char *title)
{
  fprintf(fp,
          "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"chart\" viewBox=\"0 0 %.0f %.0f\" width=\"%.0f\" "
          "height=\"%.0f\" role=\"img\" aria-label=\"",
          w, h, w, h);
  svgc_escape(fp, title);
  fprintf(fp, "\" font-family=\"sans-serif\">\n<title>");
  svgc_escape(fp, title);
  fprintf(fp, "</title>\n<rect x=\"0\" y=\"0\" width=\"%.0f\" height=\"%.0f\" fill=\"#ffffff\"/>\n", w, h);
  put_text(fp, w / 2, 16, "middle", SVGC_TITLE_PX, 1, w - 8, NULL, title);
}

/* A marker of a style at (x, y), radius r. */
static void put_marker(FILE *fp, size_t style, double x, double y, double r)
{
  const char *c = svgc_style_colour(style);
  switch (style % SVGC_STYLES) {
  case 0:
    fprintf(fp, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.1f\" fill=\"none\" stroke=\"%s\" stroke-width=\"1.3\"/>\n", x,
            y, r, c);
    break;
  case 1:
    fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"%s\"/>\n", x - r * 0.85,
            y - r * 0.85, 1.7 * r, 1.7 * r, c);
    break;
  case 2:
    fprintf(fp, "<path d=\"M%.1f %.1fL%.1f %.1fL%.1f %.1fZ\" fill=\"%s\"/>\n", x, y - r, x + r, y + 0.8 * r, x - r,
            y + 0.8 * r, c);
    break;
  case 3:
    fprintf(fp, "<path d=\"M%.1f %.1fL%.1f %.1fL%.1f %.1fL%.1f %.1fZ\" fill=\"none\" stroke=\"%s\" stroke-width=\"1.3\"/>\n",
            x, y - r, x + r, y, x, y + r, x - r, y, c);
    break;
  case 4:
    fprintf(fp, "<path d=\"M%.1f %.1fL%.1f %.1fM%.1f %.1fL%.1f %.1f\" stroke=\"%s\" stroke-width=\"1.8\"/>\n", x - r,
            y - r, x + r, y + r, x - r, y + r, x + r, y - r, c);
    break;
  default:
    fprintf(fp, "<path d=\"M%.1f %.1fL%.1f %.1fM%.1f %.1fL%.1f %.1f\" stroke=\"%s\" stroke-width=\"1.8\"/>\n", x - r,
            y, x + r, y, x, y - r, x, y + r, c);
    break;
  }
}

/* ------------------------------------------------------------ x-y charts */

typedef struct legend_layout {
  size_t rows;
  double entry_w[32];
} legend_layout;

#define LEGEND_ROW 16.0

static double legend_entry_width(const svgc_series *s) { return 30.0 + text_width(s->name, SVGC_FONT_PX) + 14.0; }

/* Rows the legend needs within width w (entries too wide are cut). */
static size_t legend_rows(const svgc_xy_chart *c, double w)
{
  size_t k, rows = 0;
  double used = 0;
  for (k = 0; k < c->n_series; k++) {
    double ew;
    if (c->series[k].name == NULL)
      continue;
    ew = fmin(legend_entry_width(&c->series[k]), w);
    if (rows == 0 || used + ew > w) {
      rows++;
      used = 0;
    }
    used += ew;
  }
  return rows;
}

/* Range of one axis from the data (and marks along it). */
static int axis_range(const svgc_xy_chart *c, int is_x, double *lo, double *hi)
{
  const svgc_axis *a = is_x ? &c->x : &c->y;
  size_t k, i;
  double mn = INFINITY, mx = -INFINITY;
  for (k = 0; k < c->n_series; k++)
    for (i = 0; i < c->series[k].n; i++) {
      double v = is_x ? c->series[k].x[i] : c->series[k].y[i];
      if (!isfinite(v) || (a->log && v <= 0))
        continue;
      mn = fmin(mn, v);
      mx = fmax(mx, v);
    }
  for (k = 0; k < c->n_marks; k++)
    if ((c->marks[k].vertical != 0) == (is_x != 0) && isfinite(c->marks[k].v) && (!a->log || c->marks[k].v > 0)) {
      mn = fmin(mn, c->marks[k].v);
      mx = fmax(mx, c->marks[k].v);
    }
  if (isfinite(a->lo))
    mn = a->lo;
  if (isfinite(a->hi))
    mx = a->hi;
  if (!isfinite(mn) || !isfinite(mx))
    return -1;
  if (a->zero && !a->log) {
    mn = fmin(mn, 0.0);
    mx = fmax(mx, 0.0);
  }
  *lo = mn;
  *hi = mx;
  return 0;
}

static int axis_ticks(const svgc_axis *a, double lo, double hi, size_t target, svgc_ticks *t)
{
  return a->log ? svgc_ticks_log(lo, hi, t) : svgc_ticks_linear(lo, hi, target, t);
}

static double max_label_width(const svgc_ticks *t)
{
  size_t k;
  char buf[32];
  double w = 0;
  for (k = 0; k < t->n; k++)
    w = fmax(w, text_width(svgc_tick_label(t, t->v[k], buf, sizeof buf), SVGC_FONT_PX));
  return w;
}

int svgc_xy(FILE *fp, const svgc_xy_chart *c)
{
  double W = c->width, H = c->height, xl, xh, yl, yh, left, right, top, bottom, plot_w;
  svgc_ticks tx, ty;
  svgc_scale sx, sy;
  size_t k, i, rows;
  char buf[32];
  if (!(W >= 160 && H >= 120))
    return -1;
  if (axis_range(c, 1, &xl, &xh) != 0 || axis_range(c, 0, &yl, &yh) != 0)
    return -1;
  if (axis_ticks(&c->y, yl, yh, 5, &ty) != 0)
    return -1;
  left = 22.0 + max_label_width(&ty) + 8.0;
  right = 14.0;
  plot_w = W - left - right;
  if (axis_ticks(&c->x, xl, xh, plot_w < 260 ? 4 : 6, &tx) != 0)
    return -1;
  rows = legend_rows(c, W - 16);
  top = 28.0;
  bottom = H - 44.0 - (double)rows * LEGEND_ROW;
  if (bottom - top < 40 || plot_w < 60)
    return -1;
  sx = (svgc_scale){ tx.lo, tx.hi, left, W - right, tx.log };
  sy = (svgc_scale){ ty.lo, ty.hi, bottom, top, ty.log };
  svg_open(fp, W, H, c->title);
  /* grid and ticks */
  fprintf(fp, "<g stroke=\"#d9d9d9\" stroke-width=\"0.6\">\n");
  for (k = 0; k < ty.n; k++)
    fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", left, svgc_map(&sy, ty.v[k]), W - right,
            svgc_map(&sy, ty.v[k]));
  for (k = 0; k < tx.n; k++)
    fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", svgc_map(&sx, tx.v[k]), top,
            svgc_map(&sx, tx.v[k]), bottom);
  fprintf(fp, "</g>\n<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"none\" stroke=\"#333333\" "
              "stroke-width=\"0.8\"/>\n",
          left, top, W - right - left, bottom - top);
  for (k = 0; k < ty.n; k++)
    put_text(fp, left - 4, svgc_map(&sy, ty.v[k]) + 4, "end", SVGC_FONT_PX, 0, left - 22,
             NULL, svgc_tick_label(&ty, ty.v[k], buf, sizeof buf));
  {
    /* x tick labels: every one that does not run into the previous */
    double last_end = -INFINITY;
    for (k = 0; k < tx.n; k++) {
      const char *lab = svgc_tick_label(&tx, tx.v[k], buf, sizeof buf);
      double x = svgc_map(&sx, tx.v[k]), w = text_width(lab, SVGC_FONT_PX);
      double x0 = x - w / 2, x1;
      /* a label at an edge moves inward rather than being cut */
      x0 = fmin(fmax(x0, 1.0), W - 1.0 - w);
      x1 = x0 + w;
      if (x0 < last_end + 4)
        continue;
      put_text(fp, (x0 + x1) / 2, bottom + 14, "middle", SVGC_FONT_PX, 0, x1 - x0 + 1, NULL, lab);
      last_end = x1;
    }
  }
  put_text(fp, (left + W - right) / 2, bottom + 30, "middle", SVGC_FONT_PX, 0, plot_w, NULL, c->x.title);
  {
    char tr[64];
    double cy = (top + bottom) / 2;
    snprintf(tr, sizeof tr, "transform=\"rotate(-90 12 %.1f)\"", cy);
    put_text(fp, 12, cy, "middle", SVGC_FONT_PX, 0, bottom - top, tr, c->y.title);
  }
  /* the series, clipped to the plot by leaving out what lies outside */
  for (k = 0; k < c->n_series; k++) {
    const svgc_series *s = &c->series[k];
    if (s->kind == SVGC_SCATTER) {
      for (i = 0; i < s->n; i++) {
        double x = s->x[i], y = s->y[i];
        if (!isfinite(x) || !isfinite(y) || (sx.log && x <= 0) || (sy.log && y <= 0))
          continue;
        if (x < tx.lo || x > tx.hi || y < ty.lo || y > ty.hi)
          continue;
        put_marker(fp, s->style, svgc_map(&sx, x), svgc_map(&sy, y), 3.2);
      }
    } else {
      int open = 0;
      double py = 0;
      for (i = 0; i < s->n; i++) {
        double x = s->x[i], y = s->y[i], X, Y;
        if (!isfinite(x) || !isfinite(y) || (sx.log && x <= 0) || (sy.log && y <= 0) || x < tx.lo || x > tx.hi ||
            y < ty.lo || y > ty.hi) {
          if (open)
            fprintf(fp, "\"/>\n");
          open = 0;
          continue;
        }
        X = svgc_map(&sx, x);
        Y = svgc_map(&sy, y);
        if (!open) {
          fprintf(fp, "<path fill=\"none\" stroke=\"%s\" stroke-width=\"1.6\"%s%s%s d=\"M%.1f %.1f", svgc_style_colour(s->style),
                  dashes[s->style % SVGC_STYLES][0] ? " stroke-dasharray=\"" : "", dashes[s->style % SVGC_STYLES],
                  dashes[s->style % SVGC_STYLES][0] ? "\"" : "", X, Y);
          open = 1;
        } else if (s->kind == SVGC_STEP) {
          fprintf(fp, "H%.1fV%.1f", X, Y);
        } else {
          fprintf(fp, "L%.1f %.1f", X, Y);
        }
        py = Y;
      }
      (void)py;
      if (open)
        fprintf(fp, "\"/>\n");
    }
  }
  /* marks */
  for (k = 0; k < c->n_marks; k++) {
    const svgc_mark *m = &c->marks[k];
    const svgc_scale *sc = m->vertical ? &sx : &sy;
    const svgc_ticks *tt = m->vertical ? &tx : &ty;
    double p;
    if (!isfinite(m->v) || (sc->log && m->v <= 0) || m->v < tt->lo || m->v > tt->hi)
      continue;
    p = svgc_map(sc, m->v);
    if (m->vertical) {
      double room_r = W - right - p - 4, room_l = p - left - 4;
      fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000000\" stroke-width=\"1.2\" "
                  "stroke-dasharray=\"5 3\"/>\n",
              p, top, p, bottom);
      if (m->label != NULL)
        put_text(fp, room_r >= room_l ? p + 3 : p - 3, top + 12, room_r >= room_l ? "start" : "end",
                 SVGC_FONT_PX, 0, fmax(room_r, room_l), NULL, m->label);
    } else {
      fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000000\" stroke-width=\"1.2\" "
                  "stroke-dasharray=\"5 3\"/>\n",
              left, p, W - right, p);
      if (m->label != NULL)
        put_text(fp, W - right - 3, p - 3 < top + 10 ? p + 12 : p - 3, "end", SVGC_FONT_PX, 0, plot_w - 6, NULL,
                 m->label);
    }
  }
  /* legend */
  {
    double x = 8, y = bottom + 38 + LEGEND_ROW / 2, room = W - 16;
    size_t placed = 0;
    for (k = 0; k < c->n_series; k++) {
      const svgc_series *s = &c->series[k];
      double ew;
      if (s->name == NULL)
        continue;
      ew = fmin(legend_entry_width(s), room);
      if (placed > 0 && x + ew > 8 + room) {
        x = 8;
        y += LEGEND_ROW;
      }
      if (s->kind == SVGC_SCATTER)
        put_marker(fp, s->style, x + 12, y, 3.2);
      else
        fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"1.6\"%s%s%s/>\n",
                x + 2, y, x + 24, y, svgc_style_colour(s->style),
                dashes[s->style % SVGC_STYLES][0] ? " stroke-dasharray=\"" : "", dashes[s->style % SVGC_STYLES],
                dashes[s->style % SVGC_STYLES][0] ? "\"" : "");
      put_text(fp, x + 30, y + 4, "start", SVGC_FONT_PX, 0, ew - 34, NULL, s->name);
      x += ew;
      placed++;
    }
  }
  fprintf(fp, "</svg>\n");
  return 0;
}

/* ------------------------------------------------------------ bars */

#define BAR_ROW 16.0

double svgc_bars_height(size_t n) { return 28.0 + (double)n * BAR_ROW + 60.0; }

int svgc_bars(FILE *fp, const svgc_bar_chart *c)
{
  double W = c->width, H = svgc_bars_height(c->n), lw = 0, left, right = 14, top = 28, bottom, lo = 0, hi = 0;
  svgc_ticks tx;
  svgc_scale sx;
  size_t k;
  char buf[32];
  if (!(W >= 200) || c->n == 0)
    return -1;
  for (k = 0; k < c->n; k++) {
    double v = c->value[k], e = c->err && isfinite(c->err[k]) ? c->err[k] : 0;
    lw = fmax(lw, text_width(c->labels[k], SVGC_FONT_PX));
    if (isfinite(v)) {
      lo = fmin(lo, v - e);
      hi = fmax(hi, v + e);
    }
  }
  left = fmin(lw + 10, 0.4 * W);
  bottom = top + (double)c->n * BAR_ROW;
  if (svgc_ticks_linear(lo, hi, W - left - right < 300 ? 4 : 6, &tx) != 0)
    return -1;
  sx = (svgc_scale){ tx.lo, tx.hi, left, W - right, 0 };
  svg_open(fp, W, H, c->title);
  fprintf(fp, "<g stroke=\"#d9d9d9\" stroke-width=\"0.6\">\n");
  for (k = 0; k < tx.n; k++)
    fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", svgc_map(&sx, tx.v[k]), top,
            svgc_map(&sx, tx.v[k]), bottom);
  fprintf(fp, "</g>\n");
  for (k = 0; k < c->n; k++) {
    double y = top + ((double)k + 0.5) * BAR_ROW, v = c->value[k], x0 = svgc_map(&sx, 0.0);
    put_text(fp, left - 4, y + 4, "end", SVGC_FONT_PX, 0, left - 6, NULL, c->labels[k]);
    if (!isfinite(v)) {
      put_text(fp, x0 + 4, y + 4, "start", SVGC_FONT_PX, 0, W - right - x0 - 6, NULL, "n/d");
      continue;
    }
    {
      double x1 = svgc_map(&sx, v);
      fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"%s\" fill-opacity=\"0.55\"/>\n",
              fmin(x0, x1), y - 5, fmax(fabs(x1 - x0), 0.6), 10.0, svgc_style_colour(0));
    }
    if (c->err && isfinite(c->err[k]) && c->err[k] > 0) {
      double a = svgc_map(&sx, v - c->err[k]), b = svgc_map(&sx, v + c->err[k]);
      fprintf(fp, "<path d=\"M%.1f %.1fH%.1fM%.1f %.1fV%.1fM%.1f %.1fV%.1f\" stroke=\"#000000\" "
                  "stroke-width=\"1.1\" fill=\"none\"/>\n",
              a, y, b, a, y - 4, y + 4, b, y - 4, y + 4);
    }
  }
  fprintf(fp, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#333333\" stroke-width=\"1\"/>\n",
          svgc_map(&sx, 0.0), top, svgc_map(&sx, 0.0), bottom);
  fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"none\" stroke=\"#333333\" "
              "stroke-width=\"0.8\"/>\n",
          left, top, W - right - left, bottom - top);
  {
    double last_end = -INFINITY;
    for (k = 0; k < tx.n; k++) {
      const char *lab = svgc_tick_label(&tx, tx.v[k], buf, sizeof buf);
      double x = svgc_map(&sx, tx.v[k]), w = text_width(lab, SVGC_FONT_PX);
      double x0 = x - w / 2, x1;
      /* a label at an edge moves inward rather than being cut */
      x0 = fmin(fmax(x0, 1.0), W - 1.0 - w);
      x1 = x0 + w;
      if (x0 < last_end + 4)
        continue;
      put_text(fp, (x0 + x1) / 2, bottom + 14, "middle", SVGC_FONT_PX, 0, x1 - x0 + 1, NULL, lab);
      last_end = x1;
    }
  }
  put_text(fp, (left + W - right) / 2, bottom + 30, "middle", SVGC_FONT_PX, 0, W - left - right, NULL,
           c->axis_title);
  put_text(fp, W / 2, H - 6, "middle", SVGC_FONT_PX, 0, W - 8, NULL,
           "bar: the change; whisker: plus and minus one standard deviation");
  fprintf(fp, "</svg>\n");
  return 0;
}

/* ------------------------------------------------------------ heat map */

const char *svgc_diverging(double v, char buf[8])
{
  /* white at 0 to dark red (+1) or dark blue (-1): the lightness falls
   * with |v| on both sides */
  static const double pos[3] = { 178, 24, 43 }, neg[3] = { 33, 102, 172 }, mid[3] = { 247, 247, 247 };
  const double *end = v >= 0 ? pos : neg;
  double f = fmin(fabs(v), 1.0);
  int c[3], k;
  if (!isfinite(v))
    f = 0;
  for (k = 0; k < 3; k++)
    c[k] = (int)lround(mid[k] + f * (end[k] - mid[k]));
  snprintf(buf, 8, "#%02x%02x%02x", (unsigned)c[0], (unsigned)c[1], (unsigned)c[2]);
  return buf;
}

int svgc_heat(FILE *fp, const svgc_heatmap *h)
{
  double lw = 0, cell, W, H, gx, gy, keyx;
  size_t a, b, k;
  char col[8];
  const double px = 10.0;
  if (h->n == 0)
    return -1;
  for (k = 0; k < h->n; k++)
    lw = fmax(lw, text_width(h->labels[k], px));
  lw = fmin(lw, 110.0);
  cell = h->n <= 12 ? 24.0 : h->n <= 24 ? 16.0 : h->n <= 48 ? 12.0 : 8.0;
  gx = lw + 8;
  gy = 28 + lw + 8;
  keyx = gx + (double)h->n * cell + 16;
  W = keyx + 80;
  if (W < 240)
    W = 240;
  H = gy + fmax((double)h->n * cell, 160.0) + 12;
  svg_open(fp, W, H, h->title);
  for (a = 0; a < h->n; a++) {
    char tr[64];
    double cx = gx + ((double)a + 0.5) * cell + 3.5;
    put_text(fp, gx - 4, gy + ((double)a + 0.5) * cell + 3.5, "end", px, 0, lw, NULL, h->labels[a]);
    snprintf(tr, sizeof tr, "transform=\"rotate(-90 %.1f %.1f)\"", cx, gy - 4);
    put_text(fp, cx, gy - 4, "start", px, 0, lw, tr, h->labels[a]);
  }
  for (a = 0; a < h->n; a++)
    for (b = 0; b < h->n; b++) {
      double v = h->m[a * h->n + b];
      double x = gx + (double)b * cell, y = gy + (double)a * cell;
      if (!isfinite(v))
        fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"#ffffff\" stroke=\"#999999\" "
                    "stroke-width=\"0.4\"/>\n",
                x, y, cell, cell);
      else
        fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"%s\"/>\n", x, y, cell, cell,
                svgc_diverging(v, col));
    }
  fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"none\" stroke=\"#333333\" "
              "stroke-width=\"0.8\"/>\n",
          gx, gy, (double)h->n * cell, (double)h->n * cell);
  /* the key: 21 steps from +1 (top) to -1 */
  for (k = 0; k <= 20; k++) {
    double v = 1.0 - 0.1 * (double)k;
    fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"14\" height=\"6.5\" fill=\"%s\"/>\n", keyx,
            gy + 6.0 * (double)k, svgc_diverging(v, col));
  }
  fprintf(fp, "<rect x=\"%.1f\" y=\"%.1f\" width=\"14\" height=\"126\" fill=\"none\" stroke=\"#333333\" "
              "stroke-width=\"0.6\"/>\n",
          keyx, gy);
  put_text(fp, keyx + 18, gy + 7, "start", px, 0, W - keyx - 20, NULL, "+1");
  put_text(fp, keyx + 18, gy + 66, "start", px, 0, W - keyx - 20, NULL, "0");
  put_text(fp, keyx + 18, gy + 126, "start", px, 0, W - keyx - 20, NULL, "-1");
  put_text(fp, keyx, gy + 144, "start", px, 0, W - keyx - 2, NULL, "correlation");
  fprintf(fp, "</svg>\n");
  return 0;
}
