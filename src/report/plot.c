/* SVG plotting. Output is a pure function of the data (fixed number formats), so a report is
 * byte-identical across runs and thread counts. */
#include "report/plot.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

double sp_nice_number(double x, int round)
{
    if (!(x > 0) || !isfinite(x))
        return 1;
    double e = floor(log10(x)), f = x / pow(10, e), nf;
    if (round)
        nf = f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10;
    else
        nf = f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
    return nf * pow(10, e);
}

static void fit_linear(sp_axis *ax, double lo, double hi, int target)
{
    if (target < 2)
        target = 2;
    if (target > SP_AXIS_MAX_TICKS / 2)
        target = SP_AXIS_MAX_TICKS / 2;
    double range = sp_nice_number(hi - lo, 0);
    double d = sp_nice_number(range / (target - 1), 1);
    double t0 = floor(lo / d + 1e-9) * d, t1 = ceil(hi / d - 1e-9) * d;
    ax->lo = t0;
    ax->hi = t1;
    ax->nticks = 0;
    for (int i = 0; ax->nticks < SP_AXIS_MAX_TICKS; i++) {
        double v = t0 + i * d;
        if (v > t1 + 0.5 * d)
            break;
        if (fabs(v) < 1e-9 * d)
            v = 0; /* no "-0" */
        ax->tick[ax->nticks++] = v;
    }
    int dig = (int)-floor(log10(d) + 1e-9);
    ax->digits = dig > 0 ? dig : 0;
}

static void fit_log(sp_axis *ax, double lo, double hi)
{
    int e0 = (int)floor(log10(lo) + 1e-9), e1 = (int)ceil(log10(hi) - 1e-9);
    if (e1 <= e0)
        e1 = e0 + 1;
    if (e1 - e0 > 30)
        e0 = e1 - 30;
    ax->lo = pow(10, e0);
    ax->hi = pow(10, e1);
    int dense = e1 - e0 < 3;
    for (int e = e0; e <= e1; e++) {
        double p = pow(10, e);
        if (ax->nticks < SP_AXIS_MAX_TICKS)
            ax->tick[ax->nticks++] = p;
        if (e == e1)
            break;
        for (int m = 2; m <= 9; m++) {
            if (dense && (m == 2 || m == 5)) {
                if (ax->nticks < SP_AXIS_MAX_TICKS)
                    ax->tick[ax->nticks++] = m * p;
            } else if (ax->nminor < SP_AXIS_MAX_TICKS) {
                ax->minor[ax->nminor++] = m * p;
            }
        }
    }
}

void sp_axis_fit(sp_axis *ax, double dmin, double dmax, int target, int log)
{
    memset(ax, 0, sizeof *ax);
    ax->log = log;
    if (log) {
        if (!(dmin > 0) || !isfinite(dmin) || !isfinite(dmax) || dmax < dmin) {
            dmin = 1;
            dmax = 10;
        }
        if (dmax == dmin) {
            dmin /= 2;
            dmax *= 2;
        }
        fit_log(ax, dmin, dmax);
        return;
    }
    if (!isfinite(dmin) || !isfinite(dmax) || dmax < dmin) {
        dmin = 0;
        dmax = 1;
    }
    if (dmax == dmin) {
        double pad = dmin != 0 ? 0.1 * fabs(dmin) : 1;
        dmin -= pad;
        dmax += pad;
    }
    fit_linear(ax, dmin, dmax, target);
}

void sp_axis_label(const sp_axis *ax, double v, char *buf, size_t n)
{
    if (ax->log) {
        double a = fabs(v);
        if (a >= 1e-3 && a < 1e5)
            snprintf(buf, n, "%g", v);
        else
            snprintf(buf, n, "%.0e", v);
        return;
    }
    double a = fabs(v);
    if (a != 0 && (a >= 1e6 || ax->digits > 5))
        snprintf(buf, n, "%g", v);
    else
        snprintf(buf, n, "%.*f", ax->digits, v);
}

static double frac(const sp_axis *ax, double v)
{
    if (ax->log) {
        if (!(v > 0))
            return NAN;
        return (log10(v) - log10(ax->lo)) / (log10(ax->hi) - log10(ax->lo));
    }
    return (v - ax->lo) / (ax->hi - ax->lo);
}

double sp_plot_px(const sp_plot *p, double x)
{
    return p->ml + frac(&p->x, x) * (p->w - p->ml - p->mr);
}

double sp_plot_py(const sp_plot *p, double y)
{
    return p->h - p->mb - frac(&p->y, y) * (p->h - p->mt - p->mb);
}

void sp_plot_begin(sp_plot *p, const char *title, const char *xlabel, const char *ylabel)
{
    sp_sbuf *b = p->b;
    char lab[64];
    if (p->w <= 0)
        p->w = 520;
    if (p->h <= 0)
        p->h = 340;
    if (p->ml <= 0)
        p->ml = 64;
    if (p->mr <= 0)
        p->mr = 16;
    if (p->mt <= 0)
        p->mt = 30;
    if (p->mb <= 0)
        p->mb = 46;
    double x0 = p->ml, x1 = p->w - p->mr, y0 = p->mt, y1 = p->h - p->mb;
    sp_sbuf_printf(b,
                   "<svg class=\"plot\" xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" "
                   "viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"",
                   p->w, p->h, p->w, p->h);
    sp_sbuf_esc(b, title);
    sp_sbuf_printf(b,
                   "\">\n<defs><clipPath id=\"clip%d\"><rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" "
                   "height=\"%.1f\"/></clipPath></defs>\n",
                   p->id, x0, y0, x1 - x0, y1 - y0);
    sp_sbuf_printf(b, "<rect x=\"0\" y=\"0\" width=\"%.0f\" height=\"%.0f\" fill=\"#fff\"/>\n", p->w, p->h);
    sp_sbuf_printf(b,
                   "<text class=\"title\" x=\"%.1f\" y=\"18\" text-anchor=\"middle\" font-weight=\"bold\">",
                   0.5 * (x0 + x1));
    sp_sbuf_esc(b, title);
    sp_sbuf_puts(b, "</text>\n<g class=\"grid\" stroke=\"#e4e4e4\" stroke-width=\"1\">\n");
    for (int i = 0; i < p->x.nticks; i++) {
        double X = sp_plot_px(p, p->x.tick[i]);
        sp_sbuf_printf(b, "<line x1=\"%.2f\" y1=\"%.1f\" x2=\"%.2f\" y2=\"%.1f\"/>\n", X, y0, X, y1);
    }
    for (int i = 0; i < p->y.nticks; i++) {
        double Y = sp_plot_py(p, p->y.tick[i]);
        sp_sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.2f\" x2=\"%.1f\" y2=\"%.2f\"/>\n", x0, Y, x1, Y);
    }
    sp_sbuf_puts(b, "</g>\n<g class=\"axes\" stroke=\"#333\" stroke-width=\"1\">\n");
    sp_sbuf_printf(b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"none\"/>\n", x0, y0,
                   x1 - x0, y1 - y0);
    for (int i = 0; i < p->x.nminor; i++) {
        double X = sp_plot_px(p, p->x.minor[i]);
        sp_sbuf_printf(b, "<line x1=\"%.2f\" y1=\"%.1f\" x2=\"%.2f\" y2=\"%.1f\"/>\n", X, y1, X, y1 + 3);
    }
    for (int i = 0; i < p->y.nminor; i++) {
        double Y = sp_plot_py(p, p->y.minor[i]);
        sp_sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.2f\" x2=\"%.1f\" y2=\"%.2f\"/>\n", x0 - 3, Y, x0, Y);
    }
    sp_sbuf_puts(b, "</g>\n<g class=\"xticks\" font-size=\"11\" text-anchor=\"middle\">\n");
    for (int i = 0; i < p->x.nticks; i++) {
        double X = sp_plot_px(p, p->x.tick[i]);
        sp_axis_label(&p->x, p->x.tick[i], lab, sizeof lab);
        sp_sbuf_printf(b,
                       "<line x1=\"%.2f\" y1=\"%.1f\" x2=\"%.2f\" y2=\"%.1f\" stroke=\"#333\"/>"
                       "<text x=\"%.2f\" y=\"%.1f\" data-v=\"%.10g\">%s</text>\n",
                       X, y1, X, y1 + 5, X, y1 + 17, p->x.tick[i], lab);
    }
    sp_sbuf_puts(b, "</g>\n<g class=\"yticks\" font-size=\"11\" text-anchor=\"end\">\n");
    for (int i = 0; i < p->y.nticks; i++) {
        double Y = sp_plot_py(p, p->y.tick[i]);
        sp_axis_label(&p->y, p->y.tick[i], lab, sizeof lab);
        sp_sbuf_printf(b,
                       "<line x1=\"%.1f\" y1=\"%.2f\" x2=\"%.1f\" y2=\"%.2f\" stroke=\"#333\"/>"
                       "<text x=\"%.1f\" y=\"%.2f\" data-v=\"%.10g\">%s</text>\n",
                       x0 - 5, Y, x0, Y, x0 - 7, Y + 4, p->y.tick[i], lab);
    }
    sp_sbuf_printf(
        b, "</g>\n<text class=\"xlabel\" x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\" font-size=\"12\">",
        0.5 * (x0 + x1), p->h - 8);
    sp_sbuf_esc(b, xlabel);
    sp_sbuf_printf(
        b,
        "</text>\n<text class=\"ylabel\" x=\"14\" y=\"%.1f\" text-anchor=\"middle\" font-size=\"12\" "
        "transform=\"rotate(-90 14 %.1f)\">",
        0.5 * (y0 + y1), 0.5 * (y0 + y1));
    sp_sbuf_esc(b, ylabel);
    sp_sbuf_printf(b, "</text>\n<g class=\"data\" clip-path=\"url(#clip%d)\">\n", p->id);
}

void sp_plot_end(sp_plot *p)
{
    sp_sbuf_puts(p->b, "</g>\n</svg>\n");
}

void sp_plot_points(sp_plot *p, const double *x, const double *y, size_t n, const char *color, int shape,
                    double r, size_t max_points)
{
    size_t step = max_points > 0 && n > max_points ? (n + max_points - 1) / max_points : 1;
    sp_sbuf_printf(p->b, "<g class=\"points\" fill=\"%s\" fill-opacity=\"0.75\" stroke=\"none\">\n", color);
    for (size_t i = 0; i < n; i += step) {
        double X = sp_plot_px(p, x[i]), Y = sp_plot_py(p, y[i]);
        if (!isfinite(X) || !isfinite(Y))
            continue;
        switch (shape) {
        case 1:
            sp_sbuf_printf(p->b, "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\"/>\n", X - r,
                           Y - r, 2 * r, 2 * r);
            break;
        case 2:
            sp_sbuf_printf(p->b, "<path d=\"M%.2f %.2fL%.2f %.2fL%.2f %.2fZ\"/>\n", X, Y - 1.2 * r, X + r,
                           Y + 0.8 * r, X - r, Y + 0.8 * r);
            break;
        case 3:
            sp_sbuf_printf(p->b, "<path d=\"M%.2f %.2fL%.2f %.2fL%.2f %.2fL%.2f %.2fZ\"/>\n", X, Y - 1.3 * r,
                           X + 1.3 * r, Y, X, Y + 1.3 * r, X - 1.3 * r, Y);
            break;
        default:
            sp_sbuf_printf(p->b, "<circle cx=\"%.2f\" cy=\"%.2f\" r=\"%.1f\"/>\n", X, Y, r);
        }
    }
    sp_sbuf_puts(p->b, "</g>\n");
}

void sp_plot_line(sp_plot *p, const double *x, const double *y, size_t n, const char *color, const char *dash,
                  double width)
{
    int open = 0;
    for (size_t i = 0; i < n; i++) {
        double X = sp_plot_px(p, x[i]), Y = sp_plot_py(p, y[i]);
        if (!isfinite(X) || !isfinite(Y) || fabs(X) > 1e5 || fabs(Y) > 1e5) {
            if (open)
                sp_sbuf_puts(p->b, "\"/>\n");
            open = 0;
            continue;
        }
        if (!open) {
            sp_sbuf_printf(p->b, "<path fill=\"none\" stroke=\"%s\" stroke-width=\"%.1f\"", color, width);
            if (dash && dash[0])
                sp_sbuf_printf(p->b, " stroke-dasharray=\"%s\"", dash);
            sp_sbuf_printf(p->b, " d=\"M%.2f %.2f", X, Y);
            open = 1;
        } else {
            sp_sbuf_printf(p->b, "L%.2f %.2f", X, Y);
        }
    }
    if (open)
        sp_sbuf_puts(p->b, "\"/>\n");
}

void sp_plot_bars(sp_plot *p, const double *edges, const double *v, int nb, const char *color)
{
    sp_sbuf_printf(p->b, "<g class=\"bars\" fill=\"%s\" stroke=\"#fff\" stroke-width=\"0.5\">\n", color);
    double base = p->y.log ? p->y.lo : (p->y.lo > 0 ? p->y.lo : 0);
    for (int i = 0; i < nb; i++) {
        if (!(v[i] > 0))
            continue;
        double X0 = sp_plot_px(p, edges[i]), X1 = sp_plot_px(p, edges[i + 1]);
        double Y = sp_plot_py(p, v[i]), Y0 = sp_plot_py(p, base);
        if (!isfinite(X0) || !isfinite(X1) || !isfinite(Y) || !isfinite(Y0))
            continue;
        sp_sbuf_printf(p->b, "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\"/>\n", X0, Y, X1 - X0,
                       Y0 - Y);
    }
    sp_sbuf_puts(p->b, "</g>\n");
}

void sp_plot_vline(sp_plot *p, double x, const char *color, const char *dash, const char *label)
{
    double X = sp_plot_px(p, x);
    if (!isfinite(X))
        return;
    sp_sbuf_printf(p->b,
                   "<line x1=\"%.2f\" y1=\"%.1f\" x2=\"%.2f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"1.5\"",
                   X, p->mt, X, p->h - p->mb, color);
    if (dash && dash[0])
        sp_sbuf_printf(p->b, " stroke-dasharray=\"%s\"", dash);
    sp_sbuf_puts(p->b, "/>\n");
    if (label && label[0]) {
        sp_sbuf_printf(p->b,
                       "<text x=\"%.2f\" y=\"%.1f\" font-size=\"11\" fill=\"%s\" text-anchor=\"end\" "
                       "transform=\"rotate(-90 %.2f %.1f)\">",
                       X - 3, p->mt + 4, color, X - 3, p->mt + 4);
        /* rotated a quarter turn: the label reads upward, ending at the top */
        sp_sbuf_esc(p->b, label);
        sp_sbuf_puts(p->b, "</text>\n");
    }
}

void sp_plot_hline(sp_plot *p, double y, const char *color, const char *dash, const char *label)
{
    double Y = sp_plot_py(p, y);
    if (!isfinite(Y))
        return;
    sp_sbuf_printf(p->b,
                   "<line x1=\"%.1f\" y1=\"%.2f\" x2=\"%.1f\" y2=\"%.2f\" stroke=\"%s\" stroke-width=\"1.5\"",
                   p->ml, Y, p->w - p->mr, Y, color);
    if (dash && dash[0])
        sp_sbuf_printf(p->b, " stroke-dasharray=\"%s\"", dash);
    sp_sbuf_puts(p->b, "/>\n");
    if (label && label[0]) {
        sp_sbuf_printf(p->b, "<text x=\"%.1f\" y=\"%.2f\" font-size=\"11\" fill=\"%s\" text-anchor=\"end\">",
                       p->w - p->mr - 4, Y - 3, color);
        sp_sbuf_esc(p->b, label);
        sp_sbuf_puts(p->b, "</text>\n");
    }
}

void sp_plot_legend(sp_plot *p, const char *name, const char *color, const char *dash, int kind)
{
    double x = p->w - p->mr - 170, y = p->mt + 12 + 15 * p->nlegend++;
    sp_sbuf_printf(
        p->b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"166\" height=\"15\" fill=\"#fff\" fill-opacity=\"0.8\"/>",
        x - 4, y - 10);
    if (kind == 1)
        sp_sbuf_printf(p->b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3\" fill=\"%s\"/>", x + 9, y - 3, color);
    else if (kind == 2)
        sp_sbuf_printf(p->b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"14\" height=\"8\" fill=\"%s\"/>", x + 2,
                       y - 7, color);
    else
        sp_sbuf_printf(
            p->b,
            "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"2\" "
            "stroke-dasharray=\"%s\"/>",
            x, y - 3, x + 18, y - 3, color, dash ? dash : "");
    sp_sbuf_printf(p->b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\">", x + 24, y);
    sp_sbuf_esc(p->b, name);
    sp_sbuf_puts(p->b, "</text>\n");
}
