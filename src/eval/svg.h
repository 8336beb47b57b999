/* A small SVG writer for the evaluation report: one plot area with linear
 * axes, polylines, markers and a legend, written into an omen_buf. */
#ifndef OMEN_EVAL_SVG_H
#define OMEN_EVAL_SVG_H

#include <stddef.h>
#include "omen/util.h"

typedef struct {
	omen_buf *b;
	double w, h;                /* whole picture, px */
	double l, r, t, bt;         /* margins */
	double xmin, xmax, ymin, ymax;
	int nlegend;
	int legend_br;              /* 1: legend in the bottom-right corner, growing up */
} svg_plot;

/* Appends XML-escaped text. */
void svg_text_esc(omen_buf *b, const char *s);
/* Opens <svg class="plot" id="..."> with a title and axis labels. */
void svg_begin(svg_plot *p, omen_buf *b, const char *id, const char *title,
	const char *xlabel, const char *ylabel, double w, double h,
	double xmin, double xmax, double ymin, double ymax);
/* Grid lines and tick labels; xfmt_date: x values are epoch seconds. */
void svg_axes(svg_plot *p, int xticks, int yticks, int xfmt_date);
/* A series as one <path class="series"> ("guide" when dashed: reference
 * lines such as chance); NaN points break the line;
 * thinned to at most about 1500 points. Also adds a legend entry. */
void svg_line(svg_plot *p, const double *x, const double *y, size_t n,
	const char *color, const char *dash, double width, const char *label);
/* Circles at points, radius r_i (NULL = 3 px each). */
void svg_markers(svg_plot *p, const double *x, const double *y, const double *r, size_t n,
	const char *color);
/* Vertical error bars from lo to hi at x. */
void svg_errbars(svg_plot *p, const double *x, const double *lo, const double *hi, size_t n,
	const char *color);
void svg_end(svg_plot *p);

#endif
