/* Our own small SVG writer (SVG 1.1 elements only: svg, g, rect, line,
 * path, circle, text), so the report needs no outside library or script. */
#include <math.h>
#include <string.h>
#include <time.h>
#include "eval/svg.h"

void svg_text_esc(omen_buf *b, const char *s)
{
	for (; s && *s; s++) {
		switch (*s) {
		case '<': omen_buf_puts(b, "&lt;"); break;
		case '>': omen_buf_puts(b, "&gt;"); break;
		case '&': omen_buf_puts(b, "&amp;"); break;
		case '"': omen_buf_puts(b, "&quot;"); break;
		default: omen_buf_put(b, s, 1);
		}
	}
}

static double px(const svg_plot *p, double x)
{
	double span = p->xmax - p->xmin;
	return p->l + (span > 0 ? (x - p->xmin) / span : 0.5) * (p->w - p->l - p->r);
}

static double py(const svg_plot *p, double y)
{
	double span = p->ymax - p->ymin;
	return p->h - p->bt - (span > 0 ? (y - p->ymin) / span : 0.5) * (p->h - p->t - p->bt);
}

void svg_begin(svg_plot *p, omen_buf *b, const char *id, const char *title,
	const char *xlabel, const char *ylabel, double w, double h,
	double xmin, double xmax, double ymin, double ymax)
{
	memset(p, 0, sizeof(*p));
	p->b = b;
	p->w = w;
	p->h = h;
	p->l = 56;
	p->r = 16;
	p->t = 34;
	p->bt = 46;
	p->xmin = xmin;
	p->xmax = xmax;
	p->ymin = ymin;
	p->ymax = ymax;
	omen_buf_printf(b, "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"plot\" id=\"");
	svg_text_esc(b, id);
	omen_buf_printf(b, "\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" "
		"font-family=\"sans-serif\" font-size=\"11\">\n", w, h, w, h);
	omen_buf_printf(b, "<rect x=\"0\" y=\"0\" width=\"%.0f\" height=\"%.0f\" fill=\"#fff\"/>\n", w, h);
	omen_buf_printf(b, "<text x=\"%.1f\" y=\"20\" font-size=\"14\" font-weight=\"bold\">", p->l);
	svg_text_esc(b, title);
	omen_buf_puts(b, "</text>\n");
	omen_buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">",
		p->l + (w - p->l - p->r) / 2, h - 8);
	svg_text_esc(b, xlabel);
	omen_buf_puts(b, "</text>\n");
	omen_buf_printf(b, "<text transform=\"translate(14 %.1f) rotate(-90)\" text-anchor=\"middle\">",
		p->t + (h - p->t - p->bt) / 2);
	svg_text_esc(b, ylabel);
	omen_buf_puts(b, "</text>\n");
}

void svg_axes(svg_plot *p, int xticks, int yticks, int xfmt_date)
{
	int i;
	omen_buf *b = p->b;
	omen_buf_printf(b, "<g class=\"axes\" stroke=\"#ddd\" stroke-width=\"1\">\n");
	for (i = 0; i <= xticks; i++) {
		double x = p->xmin + (p->xmax - p->xmin) * i / xticks;
		omen_buf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n",
			px(p, x), p->t, px(p, x), p->h - p->bt);
	}
	for (i = 0; i <= yticks; i++) {
		double y = p->ymin + (p->ymax - p->ymin) * i / yticks;
		omen_buf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n",
			p->l, py(p, y), p->w - p->r, py(p, y));
	}
	omen_buf_printf(b, "</g>\n<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" "
		"fill=\"none\" stroke=\"#555\"/>\n<g class=\"ticks\" fill=\"#333\">\n",
		p->l, p->t, p->w - p->l - p->r, p->h - p->t - p->bt);
	for (i = 0; i <= xticks; i++) {
		double x = p->xmin + (p->xmax - p->xmin) * i / xticks;
		char lab[32];
		if (xfmt_date) {
			omen_format_date(lab, (int64_t)x);
		} else {
			snprintf(lab, sizeof(lab), "%g", round(x * 100) / 100);
		}
		omen_buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"%s\">%s</text>\n",
			px(p, x), p->h - p->bt + 14,
			i == 0 && xfmt_date ? "start" : i == xticks && xfmt_date ? "end" : "middle", lab);
	}
	for (i = 0; i <= yticks; i++) {
		double y = p->ymin + (p->ymax - p->ymin) * i / yticks;
		omen_buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%g</text>\n",
			p->l - 4, py(p, y) + 4, round(y * 100) / 100);
	}
	omen_buf_puts(b, "</g>\n");
}

void svg_line(svg_plot *p, const double *x, const double *y, size_t n,
	const char *color, const char *dash, double width, const char *label)
{
	omen_buf *b = p->b;
	size_t i, step = n > 1500 ? n / 1500 : 1;
	int pen_up = 1;
	omen_buf_printf(b, "<path class=\"%s\" fill=\"none\" stroke=\"%s\" stroke-width=\"%.1f\"%s%s%s d=\"",
		dash ? "guide" : "series", color, width, dash ? " stroke-dasharray=\"" : "", dash ? dash : "", dash ? "\"" : "");
	for (i = 0; i < n; i++) {
		if (step > 1 && i % step && i != n - 1)
			continue;
		if (isnan(x[i]) || isnan(y[i])) {
			pen_up = 1;
			continue;
		}
		omen_buf_printf(b, "%s%.1f %.1f ", pen_up ? "M" : "L", px(p, x[i]), py(p, y[i]));
		pen_up = 0;
	}
	omen_buf_puts(b, "\"/>\n");
	if (label) {
		double lx = p->l + 10, ly = p->t + 14 + 15 * p->nlegend;
		if (p->legend_br) {
			lx = p->w - p->r - 190;
			ly = p->h - p->bt - 6 - 15 * p->nlegend;
		}
		omen_buf_printf(b, "<g class=\"legend\"><rect x=\"%.1f\" y=\"%.1f\" width=\"185\" "
			"height=\"15\" fill=\"#fff\" fill-opacity=\"0.8\"/><line x1=\"%.1f\" y1=\"%.1f\" "
			"x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"2.5\"%s%s%s/>"
			"<text x=\"%.1f\" y=\"%.1f\">", lx - 4, ly - 11, lx, ly - 4, lx + 20, ly - 4,
			color, dash ? " stroke-dasharray=\"" : "", dash ? dash : "", dash ? "\"" : "",
			lx + 26, ly);
		svg_text_esc(b, label);
		omen_buf_puts(b, "</text></g>\n");
		p->nlegend++;
	}
}

void svg_markers(svg_plot *p, const double *x, const double *y, const double *r, size_t n,
	const char *color)
{
	size_t i;
	for (i = 0; i < n; i++) {
		if (isnan(x[i]) || isnan(y[i]))
			continue;
		omen_buf_printf(p->b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.1f\" fill=\"%s\" "
			"fill-opacity=\"0.75\"/>\n", px(p, x[i]), py(p, y[i]), r ? r[i] : 3.0, color);
	}
}

void svg_errbars(svg_plot *p, const double *x, const double *lo, const double *hi, size_t n,
	const char *color)
{
	size_t i;
	for (i = 0; i < n; i++) {
		double cx;
		if (isnan(x[i]) || isnan(lo[i]) || isnan(hi[i]))
			continue;
		cx = px(p, x[i]);
		omen_buf_printf(p->b, "<path class=\"errbar\" stroke=\"%s\" fill=\"none\" d=\"M%.1f %.1f "
			"L%.1f %.1f M%.1f %.1f L%.1f %.1f M%.1f %.1f L%.1f %.1f\"/>\n", color,
			cx, py(p, lo[i]), cx, py(p, hi[i]), cx - 4, py(p, lo[i]), cx + 4, py(p, lo[i]),
			cx - 4, py(p, hi[i]), cx + 4, py(p, hi[i]));
	}
}

void svg_end(svg_plot *p)
{
	omen_buf_puts(p->b, "</svg>\n");
}
