/* SVG plots drawn by hand: linear or logarithmic axes with "nice" tick values, points, lines,
 * histogram bars, marker lines and a legend, appended to a text buffer as an inline <svg>. */
#ifndef SP_REPORT_PLOT_H
#define SP_REPORT_PLOT_H

#include "report/sbuf.h"

#define SP_AXIS_MAX_TICKS 64

typedef struct sp_axis {
    double lo, hi; /* drawn range (after rounding out to ticks) */
    int log;       /* 1: logarithmic (lo > 0) */
    int nticks;
    double tick[SP_AXIS_MAX_TICKS]; /* labelled tick values, increasing */
    int digits;                     /* decimals in linear tick labels */
    int nminor;
    double minor[SP_AXIS_MAX_TICKS]; /* unlabelled ticks (log axes: 2..9 × decade) */
} sp_axis;

/* Heckbert (1990, "Nice numbers for graph labels", Graphics Gems): a number 1, 2, 5 or 10 times a
 * power of ten close to x; round picks the nearest, else the smallest not below x. */
double sp_nice_number(double x, int round);

/* Choose the axis for data in [dmin, dmax]: linear ticks at a nice step (about `target` of them)
 * with the range rounded out to whole steps, or for log = 1 whole decades with 1-2-5 labels when the
 * range spans less than three decades. Non-finite or empty data give [0, 1] (log: [1, 10]); a
 * single value is widened around itself. Always succeeds. */
void sp_axis_fit(sp_axis *ax, double dmin, double dmax, int target, int log);
/* Format a tick value as labelled on the axis into buf. */
void sp_axis_label(const sp_axis *ax, double v, char *buf, size_t n);

typedef struct sp_plot {
    sp_sbuf *b;
    int id;                /* unique in the document (clip-path id) */
    double w, h;           /* SVG size in px */
    double ml, mr, mt, mb; /* margins */
    sp_axis x, y;
    int nlegend;
} sp_plot;

/* Start a plot: the svg element, title, frame, grid, ticks, tick labels and axis titles. The caller
 * has fitted p->x and p->y and set p->b, p->id. */
void sp_plot_begin(sp_plot *p, const char *title, const char *xlabel, const char *ylabel);
void sp_plot_end(sp_plot *p);
/* Data coordinates to SVG pixels (NAN for values a log axis cannot show). */
double sp_plot_px(const sp_plot *p, double x);
double sp_plot_py(const sp_plot *p, double y);

/* Markers: shape 0 circle, 1 square, 2 triangle, 3 diamond. Non-finite points are skipped; at most
 * max_points are drawn (every k-th point, deterministic) when max_points > 0. */
void sp_plot_points(sp_plot *p, const double *x, const double *y, size_t n, const char *color, int shape,
                    double r, size_t max_points);
/* A polyline through finite points (a gap at each non-finite one); dash "" for solid. */
void sp_plot_line(sp_plot *p, const double *x, const double *y, size_t n, const char *color, const char *dash,
                  double width);
/* Histogram bars over edges[0..nb] with heights v[0..nb-1]. */
void sp_plot_bars(sp_plot *p, const double *edges, const double *v, int nb, const char *color);
/* A vertical or horizontal marker line across the plot, labelled at its end. */
void sp_plot_vline(sp_plot *p, double x, const char *color, const char *dash, const char *label);
void sp_plot_hline(sp_plot *p, double y, const char *color, const char *dash, const char *label);
/* One legend entry (top-right corner, stacked): kind 0 line, 1 marker, 2 box. */
void sp_plot_legend(sp_plot *p, const char *name, const char *color, const char *dash, int kind);

#endif
