/* coexist report: private helpers shared by the figure files (map.c, plot.c, portrait.c). */
#ifndef CX_REPORT_IMPL_H
#define CX_REPORT_IMPL_H

#include <stdint.h>

#include <cairo.h>

/* Draws one figure on a cairo context whose user unit is one PNG pixel. */
typedef void (*cx_fig_draw)(cairo_t *cr, const void *ctx);

/* Render the same drawing as base.png, base.svg and base.pdf (w x h units; the vector files
 * use one point per unit). Fails when cairo reports an error on any surface. */
int cx_fig_write(const char *base, double w, double h, cx_fig_draw draw, const void *ctx);

void cx_fig_colour(cairo_t *cr, uint32_t rgb);
/* Text in the toy API's "sans-serif" face; (ax, ay) in [0, 1] anchor the text's box (0 = left
 * or top, 0.5 = centre, 1 = right or bottom); rotate: 0 horizontal, 1 reading upwards. */
void cx_fig_text(cairo_t *cr, double x, double y, double size, double ax, double ay, int rotate,
                 const char *text);
/* Width of a text at a size. */
double cx_fig_text_width(cairo_t *cr, double size, const char *text);
/* Our sequential scale for probabilities: yellow (0) -> bluish green (0.5) -> blue (1), the
 * Okabe & Ito colours #F0E442, #009E73, #0072B2, interpolated linearly in sRGB. NaN is white. */
uint32_t cx_fig_sequential(double p);
/* Axis label "name [units]". */
void cx_fig_axis_label(char *buf, size_t n, const char *name, const char *units);

#endif
