/*
 * plot_layout.c — where a chart's parts go, decided before anything is drawn (see
 * plot_render.h): axis ranges from the data, the panels' boxes (stacked panels share x,
 * insets sit over the first panel on a white ground), and the legend's place: inside the
 * first corner (from the chart's legend_pos) where it covers no drawn point, line, band
 * or inset, else outside on the right or below the x axis label. Pure arithmetic on page
 * fractions, no PLplot call; stagecal_plot_layout_map maps data to those fractions.
 */
#include <math.h>
#include <string.h>

#include "plot_render.h"

/* Axis range from the data where the chart leaves it open (NAN), padded 4 %. axis 0: x
 * over every panel; axis 1: y of panel pv (spans and texts do not count for y). */
static void axis_range(const panel_view *pv, size_t np, int axis, double a, double b, double *lo,
                       double *hi)
{
    if (!isnan(a) && !isnan(b)) {
        *lo = a;
        *hi = b;
        return;
    }
    double mn = INFINITY, mx = -INFINITY;
    for (size_t p = 0; p < np; p++) {
        for (size_t i = 0; i < pv[p].n_series; i++) {
            const stagecal_plot_series *s = &pv[p].series[i];
            for (size_t k = 0; k < s->n; k++) {
                if (!plot_point_ok(s, k))
                    continue;
                if (axis == 0) {
                    mn = fmin(mn, s->x[k]);
                    mx = fmax(mx, s->x[k]);
                    if (s->kind == STAGECAL_PLOT_SPAN)
                        mn = fmin(mn, s->y[k]), mx = fmax(mx, s->y[k]);
                } else if (s->kind != STAGECAL_PLOT_SPAN && s->kind != STAGECAL_PLOT_TEXT) {
                    mn = fmin(mn, s->y[k]);
                    mx = fmax(mx, s->y[k]);
                    if (s->y_hi && isfinite(s->y_hi[k]))
                        mx = fmax(mx, s->y_hi[k]), mn = fmin(mn, s->y_hi[k]);
                }
            }
        }
    }
    if (!isfinite(mn)) { /* a panel of stripes only */
        mn = 0;
        mx = 1;
    }
    if (mx - mn <= 1e-12 * fmax(1.0, fabs(mx))) {
        /* one value: open a window around it so PLplot gets a proper range */
        double d = fabs(mx) > 0 ? 0.05 * fabs(mx) : 0.5;
        mn -= d;
        mx += d;
    } else {
        double pad = 0.04 * (mx - mn);
        mn -= pad;
        mx += pad;
    }
    *lo = isnan(a) ? mn : a;
    *hi = isnan(b) ? mx : b;
    if (!(*lo < *hi)) { /* one end given, the data on the wrong side of it */
        double d = fabs(*lo) > 0 ? 0.05 * fabs(*lo) : 0.5;
        if (isnan(a))
            *lo = *hi - d;
        else
            *hi = *lo + d;
    }
}

static size_t utf8_len(const char *s)
{
    size_t n = 0;
    for (; s && *s; s++)
        n += ((unsigned char)*s & 0xC0) != 0x80;
    return n;
}

int plot_in_legend(const stagecal_plot_series *s)
{
    return s->label && s->label[0] && s->kind != STAGECAL_PLOT_TEXT;
}

/* Legend entries and their longest label (characters). */
static size_t legend_entries(const panel_view *pv, size_t np, size_t *maxchars)
{
    size_t n = 0;
    *maxchars = 0;
    for (size_t p = 0; p < np; p++)
        for (size_t i = 0; i < pv[p].n_series && n < MAXLEG; i++)
            if (plot_in_legend(&pv[p].series[i])) {
                size_t l = utf8_len(pv[p].series[i].label);
                *maxchars = l > *maxchars ? l : *maxchars;
                n++;
            }
    return n;
}

static void map_point(const stagecal_plot_layout *l, size_t p, double x, double y, double *px,
                      double *py)
{
    const stagecal_plot_box *b = &l->box[p];
    *px = b->x0 + (x - l->px_min[p]) / (l->px_max[p] - l->px_min[p]) * (b->x1 - b->x0);
    *py = b->y0 + (y - l->y_min[p]) / (l->y_max[p] - l->y_min[p]) * (b->y1 - b->y0);
}

void stagecal_plot_layout_map(const stagecal_plot_layout *l, size_t p, double x, double y,
                              double *px, double *py)
{
    if (!l || p >= l->n_panels) {
        *px = *py = NAN;
        return;
    }
    map_point(l, p, x, y, px, py);
}

static int box_has(const stagecal_plot_box *b, double x, double y)
{
    return x >= b->x0 && x <= b->x1 && y >= b->y0 && y <= b->y1;
}

/* Does the segment (ax, ay)–(bx, by) meet the box? (Liang–Barsky clipping.) */
static int seg_hits(const stagecal_plot_box *b, double ax, double ay, double bx, double by)
{
    double t0 = 0, t1 = 1, dx = bx - ax, dy = by - ay;
    const double p[4] = {-dx, dx, -dy, dy};
    const double q[4] = {ax - b->x0, b->x1 - ax, ay - b->y0, b->y1 - ay};
    for (int i = 0; i < 4; i++) {
        if (p[i] == 0) {
            if (q[i] < 0)
                return 0;
            continue;
        }
        double r = q[i] / p[i];
        if (p[i] < 0)
            t0 = fmax(t0, r);
        else
            t1 = fmin(t1, r);
        if (t0 > t1)
            return 0;
    }
    return 1;
}

/* Does series s of panel p put anything into box b (page fractions)? */
static int series_hits(const stagecal_plot_layout *l, size_t p, const stagecal_plot_series *s,
                       const stagecal_plot_box *b)
{
    double mw = 0.5 * l->marker_w * (s->width > 0 ? s->width : 1),
           mh = 0.5 * l->marker_h * (s->width > 0 ? s->width : 1);
    double px0 = NAN, py0 = NAN, qx0 = NAN, qy0 = NAN;
    for (size_t k = 0; k < s->n; k++) {
        if (!plot_point_ok(s, k)) {
            px0 = py0 = qx0 = qy0 = NAN;
            continue;
        }
        double px, py, qx, qy;
        switch (s->kind) {
        case STAGECAL_PLOT_POINTS: {
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            stagecal_plot_box m = {px - mw, px + mw, py - mh, py + mh};
            if (m.x1 >= b->x0 && m.x0 <= b->x1 && m.y1 >= b->y0 && m.y0 <= b->y1)
                return 1;
            break;
        }
        case STAGECAL_PLOT_TEXT: {
            map_point(l, p, s->x[k], l->y_max[p], &px, &py);
            stagecal_plot_box m = {px, px + 0.9 * l->marker_w * (double)utf8_len(s->label),
                                   py - 2 * l->marker_h, py};
            if (m.x1 >= b->x0 && m.x0 <= b->x1 && m.y1 >= b->y0 && m.y0 <= b->y1)
                return 1;
            break;
        }
        case STAGECAL_PLOT_SPAN:
            map_point(l, p, s->x[k], l->y_min[p], &px, &py);
            map_point(l, p, s->y[k], l->y_min[p], &qx, &qy);
            if (fmax(px, qx) >= b->x0 && fmin(px, qx) <= b->x1)
                return 1;
            break;
        case STAGECAL_PLOT_ERRBAR:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            map_point(l, p, s->x[k], s->y_hi[k], &qx, &qy);
            if (seg_hits(b, px, py, qx, qy))
                return 1;
            break;
        case STAGECAL_PLOT_LINE:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            if ((isnan(px0) && box_has(b, px, py)) ||
                (!isnan(px0) && seg_hits(b, px0, py0, px, py)))
                return 1;
            px0 = px;
            py0 = py;
            break;
        case STAGECAL_PLOT_BAND:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            map_point(l, p, s->x[k], s->y_hi[k], &qx, &qy);
            if (seg_hits(b, px, py, qx, qy))
                return 1;
            if (!isnan(px0)) {
                /* the quadrilateral between two abscissae: its edges, or the box inside it */
                double cx = 0.5 * (b->x0 + b->x1), cy = 0.5 * (b->y0 + b->y1);
                if (seg_hits(b, px0, py0, px, py) || seg_hits(b, qx0, qy0, qx, qy))
                    return 1;
                if (cx >= fmin(px0, px) && cx <= fmax(px0, px)) {
                    double t = px != px0 ? (cx - px0) / (px - px0) : 0;
                    double lo = py0 + t * (py - py0), hi = qy0 + t * (qy - qy0);
                    if (cy >= fmin(lo, hi) && cy <= fmax(lo, hi))
                        return 1;
                }
            }
            px0 = px;
            py0 = py;
            qx0 = qx;
            qy0 = qy;
            break;
        }
    }
    return 0;
}

stagecal_plot_box plot_corner_box(const stagecal_plot_box *v, int corner, double w, double h)
{
    double ox = LEG_OFFSET * (v->x1 - v->x0), oy = LEG_OFFSET * (v->y1 - v->y0);
    int left = corner == 0 || corner == 3, top = corner == 0 || corner == 2;
    stagecal_plot_box b;
    b.x0 = left ? v->x0 + ox : v->x1 - ox - w;
    b.x1 = b.x0 + w;
    b.y1 = top ? v->y1 - oy : v->y0 + oy + h;
    b.y0 = b.y1 - h;
    return b;
}

/* The boxes of inset panels, from the first panel's box, and their white grounds (the
 * box with room for its tick labels and caption at 0.75 of the character height ht). */
static void place_insets(const panel_view *pv, size_t np, double ht, double pw, double ph,
                         stagecal_plot_layout *l)
{
    const stagecal_plot_box m = l->box[0];
    for (size_t p = 0; p < np; p++) {
        if (!pv[p].is_inset)
            continue;
        stagecal_plot_box b = {
            m.x0 + pv[p].inset.x0 * (m.x1 - m.x0), m.x0 + pv[p].inset.x1 * (m.x1 - m.x0),
            m.y0 + pv[p].inset.y0 * (m.y1 - m.y0), m.y0 + pv[p].inset.y1 * (m.y1 - m.y0)};
        /* room: 4 characters of tick labels on the left, 2 lines below, the caption above */
        double cw = 0.75 * ht / pw, ch = 0.75 * ht / ph;
        l->box[p] = (stagecal_plot_box){b.x0 + 4.5 * cw, b.x1, b.y0 + 2.2 * ch, b.y1 - 2.0 * ch};
        l->ground[p] = b;
    }
}

void plot_plan_layout(const stagecal_plot_chart *c, const panel_view *pv, size_t np, double ht,
                      double pw, double ph, int svg, stagecal_plot_layout *l)
{
    memset(l, 0, sizeof *l);
    l->n_panels = np;
    /* stacked panels share x; insets have their own */
    panel_view stacked[STAGECAL_PLOT_MAXPANELS];
    size_t ns = 0;
    for (size_t p = 0; p < np; p++)
        if (!pv[p].is_inset)
            stacked[ns++] = pv[p];
    axis_range(stacked, ns, 0, c->x_min, c->x_max, &l->x_min, &l->x_max);
    for (size_t p = 0; p < np; p++) {
        l->px_min[p] = l->x_min;
        l->px_max[p] = l->x_max;
        if (pv[p].is_inset)
            axis_range(&pv[p], 1, 0, pv[p].x_min, pv[p].x_max, &l->px_min[p], &l->px_max[p]);
        axis_range(&pv[p], 1, 1, pv[p].y_min, pv[p].y_max, &l->y_min[p], &l->y_max[p]);
    }
    double ml = 7.0 * ht / pw, mr = 2.5 * ht / pw, mb = 4.5 * ht / ph, mt = 3.2 * ht / ph,
           gap = 1.0 * ht / ph;
    double wsum = 0, y = 1 - mt, avail = 1 - mt - mb - gap * (double)(ns - 1);
    for (size_t p = 0; p < np; p++)
        wsum += pv[p].is_inset ? 0 : pv[p].weight;
    for (size_t p = 0; p < np; p++) {
        if (pv[p].is_inset)
            continue;
        double h = avail * pv[p].weight / wsum;
        l->box[p] = (stagecal_plot_box){ml, 1 - mr, y - h, y};
        y -= h + gap;
    }
    place_insets(pv, np, ht, pw, ph, l);
    l->marker_w = ht / pw; /* a marker glyph is about one character high and wide */
    l->marker_h = ht / ph;
    size_t maxchars, n = c->legend ? legend_entries(pv, np, &maxchars) : 0;
    if (n == 0)
        return;
    l->has_legend = 1;
    /* the legend's size, from PLplot's layout rules: n rows of LEG_TEXT_SPACING character
     * heights, and the sample, the offset and the text. The text: at most 0.58 character
     * heights a character with cairo, 0.65 with the svg driver (measured with the text at
     * 0.9 of the chart's character height on labels of 5 to 45 characters: 0.654 and 0.750,
     * so 0.545 and 0.625 at LEG_TEXT_SCALE = 0.75), plus 2.6 of margins */
    double tw = ht * (2.6 + (svg ? 0.65 : 0.58) * (double)maxchars) / pw;
    double h = ht * (LEG_TEXT_SPACING * (double)n + 0.6) / ph;
    if (ns == 1) {
        for (int k = 0; k < 4; k++) {
            int corner = (c->legend_pos + k) & 3;
            double w = LEG_PLOT_WIDTH * (l->box[0].x1 - l->box[0].x0) + tw;
            stagecal_plot_box b = plot_corner_box(&l->box[0], corner, w, h);
            int hit = 0;
            for (size_t i = 0; i < pv[0].n_series && !hit; i++)
                hit = series_hits(l, 0, &pv[0].series[i], &b);
            for (size_t p = 1; p < np && !hit; p++) /* an inset is taken space */
                hit = pv[p].is_inset && l->ground[p].x1 >= b.x0 && l->ground[p].x0 <= b.x1 &&
                      l->ground[p].y1 >= b.y0 && l->ground[p].y0 <= b.y1;
            if (!hit) {
                l->legend_inside = 1;
                l->legend_corner = corner;
                l->legend_est = b;
                return;
            }
        }
    }
    /* outside. One panel: on the right of the box, in a region of its own, unless that
     * leaves the plot less than half the drawing's width (long labels: the chart would be
     * a sliver beside its legend); stacked panels, and such a panel: below the x axis
     * label, in as many columns as fit (they need the width) */
    l->legend_inside = 0;
    double x1 = 0.985 - tw / (1 - LEG_PLOT_WIDTH);
    if (ns > 1 || x1 - l->box[0].x0 < 0.5) {
        double rx0 = l->box[0].x0, rx1 = 0.99, rw = rx1 - rx0;
        size_t ncol = (size_t)floor(rw / (LEG_PLOT_WIDTH * rw + tw + 1.0 * ht / pw));
        ncol = ncol < 1 ? 1 : ncol > n ? n : ncol;
        size_t nrow = (n + ncol - 1) / ncol;
        double lh = ht * (LEG_TEXT_SPACING * (double)nrow + 0.6) / ph, lift = lh + 0.01;
        l->legend_below = 1;
        l->legend_cols = ncol;
        l->legend_rows = nrow;
        l->legend_region = (stagecal_plot_box){rx0, rx1, 0.005, 0.005 + lh};
        l->legend_est = (stagecal_plot_box){rx0, rx0 + (double)ncol * (LEG_PLOT_WIDTH * rw + tw),
                                            0.005, 0.005 + lh};
        /* lift the boxes: squeeze their heights into what is left above the legend */
        double top = l->box[0].y1, bottom = 1, nb;
        for (size_t p = 0; p < np; p++)
            if (!pv[p].is_inset)
                bottom = fmin(bottom, l->box[p].y0);
        nb = bottom + lift;
        for (size_t p = 0; p < np; p++) {
            l->box[p].y0 = nb + (l->box[p].y0 - bottom) * (top - nb) / (top - bottom);
            l->box[p].y1 = nb + (l->box[p].y1 - bottom) * (top - nb) / (top - bottom);
        }
        place_insets(pv, np, ht, pw, ph, l);
        return;
    }
    for (size_t p = 0; p < np; p++)
        l->box[p].x1 = x1;
    place_insets(pv, np, ht, pw, ph, l);
    l->legend_region = (stagecal_plot_box){x1 + 0.01, 0.995, l->box[0].y0, l->box[0].y1};
    double rw = l->legend_region.x1 - l->legend_region.x0;
    l->legend_est =
        (stagecal_plot_box){l->legend_region.x0, l->legend_region.x0 + LEG_PLOT_WIDTH * rw + tw,
                            l->box[0].y1 - h, l->box[0].y1};
}
