/* check_svgchart.c: the chart module of the HTML report (src/cli/svgchart.c):
 * tick steps on known ranges, scales, escaping, and per chart kind that
 * the SVG is well-formed XML (parsed by libxml2) and that everything drawn,
 * text included at its estimated width, lies inside the viewBox. */
#define _GNU_SOURCE
#include "svgchart.h"
#include "testutil.h"

#include <libxml/parser.h>
#include <libxml/tree.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* The ticks as a string "v0,v1,..." (%g), for comparison. */
static const char *ticks_text(const svgc_ticks *t)
{
  static char buf[1024];
  size_t k, used = 0;
  buf[0] = '\0';
  for (k = 0; k < t->n && used < sizeof buf - 32; k++)
    used += (size_t)snprintf(buf + used, sizeof buf - used, "%s%g", k ? "," : "", t->v[k]);
  return buf;
}

/* Expected ticks: a 1-2-5 step covering the range in about 5 steps
 * (common practice, no source: the ladder of most plotting programs). */
START_TEST(test_ticks_known_ranges)
{
  svgc_ticks t;
  ck_assert_int_eq(svgc_ticks_linear(0, 1, 5, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "0,0.2,0.4,0.6,0.8,1");
  ck_assert_close(t.step, 0.2, 1e-12);
  ck_assert_int_eq(svgc_ticks_linear(0, 0.037, 5, &t), 0);
  ck_assert_msg(fabs(t.step - 0.01) < 1e-15 || fabs(t.step - 0.005) < 1e-15, "step %g", t.step);
  ck_assert_str_eq(ticks_text(&t), "0,0.01,0.02,0.03,0.04");
  ck_assert_int_eq(svgc_ticks_linear(-3.7, -0.2, 5, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "-4,-3,-2,-1,0");
  ck_assert_int_eq(svgc_ticks_linear(-0.83, 1.27, 5, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "-1,-0.5,0,0.5,1,1.5");
  ck_assert_int_eq(svgc_ticks_linear(2412.1, 2412.9, 4, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "2412,2412.2,2412.4,2412.6,2412.8,2413");
  /* a zero-width range is widened around its value */
  ck_assert_int_eq(svgc_ticks_linear(0, 0, 5, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "-1,-0.5,0,0.5,1");
  ck_assert_int_eq(svgc_ticks_linear(5, 5, 5, &t), 0);
  ck_assert(t.lo <= 2.5 && t.hi >= 7.5 && t.lo < 5 && t.hi > 5);
  ck_assert_int_eq(svgc_ticks_linear(NAN, 1, 5, &t), -1);
  ck_assert_int_eq(svgc_ticks_linear(0, 1, 1, &t), -1);
  /* every range gets between target/2 and target + 2 intervals */
  {
    twf_test_rng rng;
    int k;
    twf_test_rng_init(&rng, twf_test_seed(1401));
    for (k = 0; k < 2000; k++) {
      double a = twf_test_uniform(&rng, -1, 1) * pow(10, twf_test_uniform(&rng, -6, 6));
      double b = a + pow(10, twf_test_uniform(&rng, -7, 5));
      size_t intervals;
      ck_assert_int_eq(svgc_ticks_linear(a, b, 5, &t), 0);
      intervals = t.n - 1;
      ck_assert_msg(intervals >= 2 && intervals <= 7, "%g..%g: %zu intervals", a, b, intervals);
      ck_assert(t.lo <= a + 1e-6 * t.step && t.hi >= b - 1e-6 * t.step);
    }
  }
}
END_TEST

START_TEST(test_ticks_log)
{
  svgc_ticks t;
  char buf[32];
  ck_assert_int_eq(svgc_ticks_log(1e-6, 1e2, &t), 0);
  ck_assert_uint_eq(t.n, 9);
  ck_assert_close(t.v[0], 1e-6, 1e-12);
  ck_assert_close(t.v[8], 100, 1e-12);
  ck_assert_str_eq(svgc_tick_label(&t, t.v[0], buf, sizeof buf), "1e-6");
  ck_assert_str_eq(svgc_tick_label(&t, t.v[5], buf, sizeof buf), "0.1");
  ck_assert_str_eq(svgc_tick_label(&t, t.v[8], buf, sizeof buf), "100");
  ck_assert_int_eq(svgc_ticks_log(0.0123, 4.5, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "0.01,0.1,1,10");
  ck_assert_int_eq(svgc_ticks_log(1, 1, &t), 0);
  ck_assert_str_eq(ticks_text(&t), "0.1,1,10");
  ck_assert_int_eq(svgc_ticks_log(0, 1, &t), -1);
  ck_assert_int_eq(svgc_ticks_log(-1, 1, &t), -1);
}
END_TEST

START_TEST(test_tick_labels)
{
  svgc_ticks t;
  char buf[32];
  ck_assert_int_eq(svgc_ticks_linear(0, 0.037, 8, &t), 0);
  ck_assert_close(t.step, 0.005, 1e-12);
  ck_assert_str_eq(svgc_tick_label(&t, t.v[1], buf, sizeof buf), "0.005");
  ck_assert_str_eq(svgc_tick_label(&t, t.v[2], buf, sizeof buf), "0.010");
  ck_assert_int_eq(svgc_ticks_linear(0, 1, 5, &t), 0);
  ck_assert_str_eq(svgc_tick_label(&t, t.v[1], buf, sizeof buf), "0.2");
  ck_assert_str_eq(svgc_tick_label(&t, t.v[0], buf, sizeof buf), "0.0");
  /* a tiny step: short forms, 0 as "0" */
  ck_assert_int_eq(svgc_ticks_linear(-1.2e-14, 1.7e-14, 5, &t), 0);
  ck_assert_close(t.step, 1e-14, 1e-9);
  ck_assert_str_eq(svgc_tick_label(&t, 0.0, buf, sizeof buf), "0");
  ck_assert_str_eq(svgc_tick_label(&t, t.v[0], buf, sizeof buf), "-2e-14");
  ck_assert_int_eq(svgc_ticks_linear(-180, 180, 4, &t), 0);
  ck_assert_str_eq(svgc_tick_label(&t, t.v[0], buf, sizeof buf), "-200");
}
END_TEST

START_TEST(test_scales)
{
  svgc_scale s = { 0.0, 2.0, 50.0, 450.0, 0 }, l = { 1e-3, 1e1, 300.0, 20.0, 1 };
  ck_assert_close(svgc_map(&s, 0.0), 50.0, 1e-12);
  ck_assert_close(svgc_map(&s, 2.0), 450.0, 1e-12);
  ck_assert_close(svgc_map(&s, 0.5), 150.0, 1e-12);
  ck_assert_close(svgc_map(&l, 1e-3), 300.0, 1e-12);
  ck_assert_close(svgc_map(&l, 1e1), 20.0, 1e-12);
  ck_assert_close(svgc_map(&l, 1e-1), 160.0, 1e-12); /* half-way in decades */
}
END_TEST

static char *capture_escape(const char *s)
{
  char *out = NULL;
  size_t n = 0;
  FILE *fp = open_memstream(&out, &n);
  ck_assert_ptr_nonnull(fp);
  svgc_escape(fp, s);
  fclose(fp);
  return out;
}

START_TEST(test_escape)
{
  char *e = capture_escape("a<b & \"c\" 'd'>e \xC2\xB5m");
  ck_assert_str_eq(e, "a&lt;b &amp; &quot;c&quot; &#39;d&#39;&gt;e \xC2\xB5m");
  free(e);
  e = capture_escape("");
  ck_assert_str_eq(e, "");
  free(e);
  e = capture_escape("&amp;");
  ck_assert_str_eq(e, "&amp;amp;");
  free(e);
}
END_TEST

/* ------------------------------------------------------------ extents */

typedef struct box { double w, h; int bad; char what[160]; } box;

static double attr_num(xmlNode *n, const char *name, double dflt)
{
  xmlChar *v = xmlGetProp(n, (const xmlChar *)name);
  double d = dflt;
  if (v != NULL) {
    d = strtod((const char *)v, NULL);
    xmlFree(v);
  }
  return d;
}

static void out_of_box(box *b, const char *what, double x, double y)
{
  if (x < -0.01 || y < -0.01 || x > b->w + 0.01 || y > b->h + 0.01) {
    if (!b->bad)
      snprintf(b->what, sizeof b->what, "%s at %.1f %.1f outside 0 0 %.0f %.0f", what, x, y, b->w, b->h);
    b->bad = 1;
  }
}

/* Code points of a UTF-8 string. */
static size_t chars_of(const char *s)
{
  size_t n = 0;
  for (; *s; s++)
    if (((unsigned char)*s & 0xC0) != 0x80)
      n++;
  return n;
}

static void check_node(xmlNode *n, box *b)
{
  for (; n != NULL; n = n->next) {
    const char *name = (const char *)n->name;
    if (n->type != XML_ELEMENT_NODE)
      continue;
    if (strcmp(name, "rect") == 0) {
      double x = attr_num(n, "x", 0), y = attr_num(n, "y", 0);
      out_of_box(b, "rect", x, y);
      out_of_box(b, "rect", x + attr_num(n, "width", 0), y + attr_num(n, "height", 0));
    } else if (strcmp(name, "line") == 0) {
      out_of_box(b, "line", attr_num(n, "x1", 0), attr_num(n, "y1", 0));
      out_of_box(b, "line", attr_num(n, "x2", 0), attr_num(n, "y2", 0));
    } else if (strcmp(name, "circle") == 0) {
      double x = attr_num(n, "cx", 0), y = attr_num(n, "cy", 0), r = attr_num(n, "r", 0);
      out_of_box(b, "circle", x - r, y - r);
      out_of_box(b, "circle", x + r, y + r);
    } else if (strcmp(name, "path") == 0) {
      /* absolute M, L, H, V commands only (what the module writes) */
      xmlChar *d = xmlGetProp(n, (const xmlChar *)"d");
      const char *p = (const char *)d;
      double x = 0, y = 0;
      while (p && *p) {
        char cmd = *p++;
        char *end;
        if (cmd == 'M' || cmd == 'L') {
          x = strtod(p, &end);
          y = strtod(end, &end);
          p = end;
        } else if (cmd == 'H') {
          x = strtod(p, &end);
          p = end;
        } else if (cmd == 'V') {
          y = strtod(p, &end);
          p = end;
        } else if (cmd == 'Z' || cmd == ' ') {
          continue;
        } else {
          ck_abort_msg("unexpected path command %c", cmd);
        }
        out_of_box(b, "path", x, y);
      }
      xmlFree(d);
    } else if (strcmp(name, "text") == 0) {
      xmlChar *content = xmlNodeGetContent(n), *anchor = xmlGetProp(n, (const xmlChar *)"text-anchor");
      xmlChar *tr = xmlGetProp(n, (const xmlChar *)"transform");
      double x = attr_num(n, "x", 0), y = attr_num(n, "y", 0), px = attr_num(n, "font-size", 11);
      double w = (double)chars_of((const char *)content) * px * SVGC_CHAR_EM, x0, x1;
      const char *a = anchor ? (const char *)anchor : "start";
      x0 = strcmp(a, "middle") == 0 ? x - w / 2 : strcmp(a, "end") == 0 ? x - w : x;
      x1 = x0 + w;
      if (tr != NULL) {
        /* rotate(-90 cx cy): the text runs upward from (cx, cy) */
        double cx, cy;
        ck_assert_int_eq(sscanf((const char *)tr, "rotate(-90 %lf %lf)", &cx, &cy), 2);
        out_of_box(b, "rotated text", cx - 0.8 * px, cy - (x0 - cx));
        out_of_box(b, "rotated text", cx + 0.25 * px, cy - (x1 - cx));
      } else {
        out_of_box(b, "text", x0, y - 0.8 * px);
        out_of_box(b, "text", x1, y + 0.25 * px);
      }
      xmlFree(content);
      xmlFree(anchor);
      xmlFree(tr);
    }
    check_node(n->children, b);
  }
}

/* Parse the SVG in buf and check every element against the viewBox. */
static void check_svg(const char *buf, size_t n)
{
  xmlDoc *doc = xmlReadMemory(buf, (int)n, "chart.svg", NULL, XML_PARSE_NONET | XML_PARSE_NOERROR);
  xmlNode *root;
  xmlChar *vb;
  box b;
  double x0, y0;
  ck_assert_msg(doc != NULL, "not well-formed XML:\n%s", buf);
  root = xmlDocGetRootElement(doc);
  ck_assert_str_eq((const char *)root->name, "svg");
  vb = xmlGetProp(root, (const xmlChar *)"viewBox");
  ck_assert_ptr_nonnull(vb);
  memset(&b, 0, sizeof b);
  ck_assert_int_eq(sscanf((const char *)vb, "%lf %lf %lf %lf", &x0, &y0, &b.w, &b.h), 4);
  ck_assert(x0 == 0 && y0 == 0 && b.w > 0 && b.h > 0);
  xmlFree(vb);
  check_node(root->children, &b);
  ck_assert_msg(!b.bad, "%s", b.what);
  xmlFreeDoc(doc);
}

typedef struct capture { char *buf; size_t n; FILE *fp; } capture;
static void cap_open(capture *c)
{
  c->buf = NULL;
  c->n = 0;
  c->fp = open_memstream(&c->buf, &c->n);
  ck_assert_ptr_nonnull(c->fp);
}
static void cap_close_check(capture *c)
{
  fclose(c->fp);
  check_svg(c->buf, c->n);
  free(c->buf);
}

START_TEST(test_xy_chart_kinds)
{
  double x[40], y1[40], y2[40], cdf[40];
  size_t i;
  svgc_series s[4];
  svgc_mark mk[2] = { { 0.02, 1, "noise level sigma 0.020 mm <with> & 'quotes'" }, { 0.5, 0, "limit" } };
  svgc_xy_chart c;
  capture cap;
  for (i = 0; i < 40; i++) {
    x[i] = (double)i;
    y1[i] = 0.9 + 0.3 * sin(0.4 * (double)i);
    y2[i] = 0.03 + 0.01 * cos((double)i);
    cdf[i] = ((double)i + 1) / 40.0;
  }
  y1[7] = NAN; /* skipped */
  s[0] = (svgc_series){ "fit, before calibration", SVGC_SCATTER, 0, 40, x, y1 };
  s[1] = (svgc_series){ "check, after calibration", SVGC_SCATTER, 2, 40, x, y2 };
  s[2] = (svgc_series){ "a line", SVGC_LINE, 1, 40, x, y2 };
  s[3] = (svgc_series){ "dropped by the screen (a very long legend entry that must still fit its row)", SVGC_SCATTER, 4, 3, x, y1 };
  memset(&c, 0, sizeof c);
  c.title = "Error per measurement, a title long enough to need cutting when the chart is narrow";
  c.width = 640;
  c.height = 300;
  c.x = (svgc_axis){ "measurement (campaign order)", NAN, NAN, 0, 0 };
  c.y = (svgc_axis){ "position error |measured - model| (mm)", NAN, NAN, 0, 1 };
  c.n_series = 4;
  c.series = s;
  c.n_marks = 1;
  c.marks = &mk[1];
  cap_open(&cap);
  ck_assert_int_eq(svgc_xy(cap.fp, &c), 0);
  cap_close_check(&cap);
  /* narrow: the title and the legend are cut, nothing leaves the box */
  c.width = 220;
  c.height = 240;
  cap_open(&cap);
  ck_assert_int_eq(svgc_xy(cap.fp, &c), 0);
  cap_close_check(&cap);
  /* a cumulative distribution on a log x axis with a vertical mark */
  s[0] = (svgc_series){ "before", SVGC_STEP, 0, 40, y1, cdf };
  s[1] = (svgc_series){ "after", SVGC_STEP, 1, 40, y2, cdf };
  c.width = 640;
  c.height = 280;
  c.n_series = 2;
  c.x = (svgc_axis){ "position error (mm, log scale)", NAN, NAN, 1, 0 };
  c.y = (svgc_axis){ "fraction of measurements", 0, 1, 0, 0 };
  c.marks = mk;
  c.n_marks = 1;
  cap_open(&cap);
  ck_assert_int_eq(svgc_xy(cap.fp, &c), 0);
  cap_close_check(&cap);
  /* log-scale points with a horizontal line (singular values) */
  for (i = 0; i < 20; i++)
    y1[i] = pow(10.0, 3.0 - 0.2 * (double)i);
  s[0] = (svgc_series){ "singular value", SVGC_SCATTER, 0, 20, x, y1 };
  c.n_series = 1;
  c.x = (svgc_axis){ "index (largest first)", 0.5, 20.5, 0, 0 };
  c.y = (svgc_axis){ "singular value (1/mm)", NAN, NAN, 1, 0 };
  mk[0] = (svgc_mark){ 0.05, 0, "noise level" };
  c.marks = mk;
  c.n_marks = 1;
  cap_open(&cap);
  ck_assert_int_eq(svgc_xy(cap.fp, &c), 0);
  cap_close_check(&cap);
  /* no finite data: refused */
  for (i = 0; i < 20; i++)
    y1[i] = NAN;
  c.n_marks = 0;
  cap_open(&cap);
  ck_assert_int_eq(svgc_xy(cap.fp, &c), -1);
  fclose(cap.fp);
  free(cap.buf);
}
END_TEST

START_TEST(test_bars)
{
  static const char *const labels[5] = { "j1 a", "j2 alpha", "j3 & <d>", "a label far too long for the left column of a narrow chart", "j5 theta" };
  double v[5] = { 0.0123, -0.0045, NAN, 0.002, -0.03 }, e[5] = { 0.002, 0.001, NAN, NAN, 0.004 };
  svgc_bar_chart c = { "Link parameters: as-built minus starting (mm)", 500, "difference (mm)", 5, labels, v, e };
  capture cap;
  cap_open(&cap);
  ck_assert_int_eq(svgc_bars(cap.fp, &c), 0);
  cap_close_check(&cap);
  c.width = 200;
  cap_open(&cap);
  ck_assert_int_eq(svgc_bars(cap.fp, &c), 0);
  cap_close_check(&cap);
}
END_TEST

START_TEST(test_heat)
{
  enum { N = 33 };
  static char names[N][16];
  const char *labels[N];
  double m[N * N];
  size_t a, b;
  svgc_heatmap h;
  capture cap;
  char c0[8], c1[8], c2[8];
  for (a = 0; a < N; a++) {
    snprintf(names[a], sizeof names[a], "j%zu.tilt%zu", a / 6 + 1, a % 2 + 1);
    labels[a] = names[a];
    for (b = 0; b < N; b++)
      m[a * N + b] = a == b ? 1.0 : cos(0.3 * (double)(a + 2 * b));
  }
  m[5] = NAN;
  h = (svgc_heatmap){ "Correlation of the estimated parameters", N, labels, m };
  cap_open(&cap);
  ck_assert_int_eq(svgc_heat(cap.fp, &h), 0);
  cap_close_check(&cap);
  h.n = 3;
  cap_open(&cap);
  ck_assert_int_eq(svgc_heat(cap.fp, &h), 0);
  cap_close_check(&cap);
  /* the palette: white at 0; both ends dark (grey print shows |rho|);
   * hue tells the sign */
  ck_assert_str_eq(svgc_diverging(0.0, c0), "#f7f7f7");
  svgc_diverging(1.0, c1);
  svgc_diverging(-1.0, c2);
  ck_assert_str_ne(c1, c2);
  {
    unsigned r, g, bl;
    sscanf(c1 + 1, "%2x%2x%2x", &r, &g, &bl);
    ck_assert(0.299 * r + 0.587 * g + 0.114 * bl < 110);
    sscanf(c2 + 1, "%2x%2x%2x", &r, &g, &bl);
    ck_assert(0.299 * r + 0.587 * g + 0.114 * bl < 110);
  }
}
END_TEST

static Suite *suite(void)
{
  Suite *s = suite_create("svgchart");
  TCase *tc = tcase_create("core");
  tcase_add_test(tc, test_ticks_known_ranges);
  tcase_add_test(tc, test_ticks_log);
  tcase_add_test(tc, test_tick_labels);
  tcase_add_test(tc, test_scales);
  tcase_add_test(tc, test_escape);
  tcase_add_test(tc, test_xy_chart_kinds);
  tcase_add_test(tc, test_bars);
  tcase_add_test(tc, test_heat);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) { return twf_test_run(suite()); }
