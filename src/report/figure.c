/* coexist report: one drawing rendered to the three cairo surfaces (image for PNG, SVG, PDF), and
 * small text and colour helpers. Text uses cairo's toy API with the generic "sans-serif" family,
 * which fontconfig resolves to whatever font the machine has; with no font at all cairo still
 * renders (boxes or nothing), so a report never fails for want of a font.
 *
 * The sequential colour scale is our own: three colours of the Okabe & Ito (2008) palette
 * ("Color Universal Design", J*FLY; hex values quoted from memory), from light to dark,
 * joined linearly in sRGB. Its lightness falls monotonically (yellow, bluish green, blue).
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <cairo.h>
#include <cairo-pdf.h>
#include <cairo-svg.h>

#include "coexist/error.h"
#include "report/report_impl.h"

void cx_fig_colour(cairo_t *cr, uint32_t rgb)
{
    cairo_set_source_rgb(cr, (double)((rgb >> 16) & 0xFF) / 255.0,
                         (double)((rgb >> 8) & 0xFF) / 255.0, (double)(rgb & 0xFF) / 255.0);
}

void cx_fig_text(cairo_t *cr, double x, double y, double size, double ax, double ay, int rotate,
                 const char *text)
{
    cairo_text_extents_t e;
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, size);
    cairo_text_extents(cr, text, &e);
    cairo_save(cr);
    cairo_translate(cr, x, y);
    if (rotate)
        cairo_rotate(cr, -1.5707963267948966); /* -pi/2 */
    /* anchor on the advance width and a cap height of 0.72 size (not the ink box), so labels
     * of one row share a baseline whatever their letters */
    cairo_move_to(cr, -ax * e.x_advance, (1.0 - ay) * 0.72 * size);
    cairo_show_text(cr, text);
    cairo_restore(cr);
}

double cx_fig_text_width(cairo_t *cr, double size, const char *text)
{
    cairo_text_extents_t e;
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, size);
    cairo_text_extents(cr, text, &e);
    return e.x_advance;
}

uint32_t cx_fig_sequential(double p)
{
    static const double stops[3][3] = {{0xF0, 0xE4, 0x42}, {0x00, 0x9E, 0x73}, {0x00, 0x72, 0xB2}};
    if (!isfinite(p))
        return 0xFFFFFF;
    if (p < 0)
        p = 0;
    if (p > 1)
        p = 1;
    int seg = p < 0.5 ? 0 : 1;
    double u = p < 0.5 ? p / 0.5 : (p - 0.5) / 0.5;
    uint32_t out = 0;
    for (int ch = 0; ch < 3; ch++) {
        double v = stops[seg][ch] + u * (stops[seg + 1][ch] - stops[seg][ch]);
        out = (out << 8) | (uint32_t)lround(v);
    }
    return out;
}

void cx_fig_axis_label(char *buf, size_t n, const char *name, const char *units)
{
    snprintf(buf, n, "%s [%s]", name, units && units[0] ? units : "1");
}

static int check(cairo_t *cr, cairo_surface_t *s, const char *path)
{
    cairo_status_t st = cairo_status(cr);
    if (st == CAIRO_STATUS_SUCCESS)
        st = cairo_surface_status(s);
    if (st != CAIRO_STATUS_SUCCESS)
        return CX_FAIL(CX_ERR_IO, "cairo: drawing %s failed: %s", path, cairo_status_to_string(st));
    return CX_OK;
}

int cx_fig_write(const char *base, double w, double h, cx_fig_draw draw, const void *ctx)
{
    int rc = CX_OK;
    char path[4096];
    cairo_surface_t *s = NULL;
    cairo_t *cr = NULL;
    for (int kind = 0; kind < 3; kind++) {
        static const char *const ext[3] = {"png", "svg", "pdf"};
        snprintf(path, sizeof path, "%s.%s", base, ext[kind]);
        if (kind == 0)
            s = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)w, (int)h);
        else if (kind == 1)
            s = cairo_svg_surface_create(path, w, h);
        else
            s = cairo_pdf_surface_create(path, w, h);
        cr = cairo_create(s);
        cx_fig_colour(cr, 0xFFFFFF);
        cairo_paint(cr);
        draw(cr, ctx);
        CX_TRY(check(cr, s, path));
        cairo_show_page(cr);
        if (kind == 0) {
            cairo_status_t st = cairo_surface_write_to_png(s, path);
            CX_REQUIRE(st == CAIRO_STATUS_SUCCESS, CX_ERR_IO, "cannot write %s: %s", path,
                       cairo_status_to_string(st));
        }
        cairo_destroy(cr);
        cr = NULL;
        cairo_surface_finish(s);
        CX_REQUIRE(cairo_surface_status(s) == CAIRO_STATUS_SUCCESS, CX_ERR_IO,
                   "cannot write %s: %s", path, cairo_status_to_string(cairo_surface_status(s)));
        cairo_surface_destroy(s);
        s = NULL;
    }
done:
    if (cr != NULL)
        cairo_destroy(cr);
    if (s != NULL)
        cairo_surface_destroy(s);
    return rc;
}
