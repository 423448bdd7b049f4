#include "calib/calibrate.h"

#include "calib/dots.h"
#include "calib/lattice.h"
#include "io/source_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void sp_calib_settings_default(sp_calib_settings *s)
{
    memset(s, 0, sizeof *s);
    s->polarity = SP_DOTS_AUTO;
    s->min_dot_px = 4;
    s->min_dots = 12;
    s->distortion = -1;
    s->point_u_px = 0.5;
}

/* Known length between two picked points: s = L/d. Each endpoint carries an independent error of
 * point_u_px per axis; only the component along the line changes d, so u(d) = sqrt(2)·u_p and
 * u(s)/s = sqrt((u(d)/d)² + (u(L)/L)²). The direction's uncertainty is u_p·sqrt(2)/d radians. */
static int two_point(const sp_calib_settings *s, const char *image, sp_calib_result *res, sp_error *err)
{
    const double *p = s->points;
    for (int k = 0; k < 4; k++)
        if (!isfinite(p[k]) || p[k] < -0.5 || p[k] > (k % 2 ? res->height : res->width) - 0.5)
            return sp_error_set(err, SP_ERR_INPUT, "%s: point %g,%g lies outside the %dx%d image", image,
                                p[k - k % 2], p[k - k % 2 + 1], res->width, res->height);
    if (!(s->length_mm > 0) || !isfinite(s->length_mm))
        return sp_error_set(err, SP_ERR_INPUT, "%s: bad length %g mm (must be > 0)", image, s->length_mm);
    if (!(s->length_u_mm >= 0) || !(s->point_u_px >= 0) || !isfinite(s->length_u_mm) ||
        !isfinite(s->point_u_px))
        return sp_error_set(err, SP_ERR_INPUT, "%s: bad uncertainty of the length or the points", image);
    double dx = p[2] - p[0], dy = p[3] - p[1], d = hypot(dx, dy);
    if (d < 2)
        return sp_error_set(err, SP_ERR_INPUT, "%s: the two points are %.3g px apart (at least 2 needed)",
                            image, d);
    double ud = sqrt(2.0) * s->point_u_px, rel = hypot(ud / d, s->length_u_mm / s->length_mm);
    strcpy(res->method, "two_point");
    res->mm_per_px = s->length_mm / d;
    res->mm_per_px_uncertainty = res->mm_per_px * rel;
    double a = atan2(-dy, dx) * 180 / M_PI; /* a line has no direction: fold into (-90, 90] */
    if (a <= -90)
        a += 180;
    else if (a > 90)
        a -= 180;
    res->rotation_deg = a;
    res->rotation_uncertainty_deg = ud / d * 180 / M_PI;
    memcpy(res->points, p, sizeof res->points);
    res->length_mm = s->length_mm;
    return SP_OK;
}

int sp_calibrate(const char *image, const sp_calib_settings *s, sp_calib_result *res, sp_error *err)
{
    int rc = SP_OK;
    sp_image im = {0};
    sp_dot *dots = NULL;
    int nd = 0, ni = 0, pol = 0;
    memset(res, 0, sizeof *res);
    if (strlen(image) >= sizeof res->image)
        return sp_error_set(err, SP_ERR_INPUT, "%.200s...: path too long", image);
    strcpy(res->image, image);
    if (!s->two_point && (!(s->pitch_mm > 0) || !isfinite(s->pitch_mm) || s->pitch_mm > 1e4))
        return sp_error_set(err, SP_ERR_INPUT, "%s: bad pitch %g mm (must be > 0)", image, s->pitch_mm);
    if (s->distortion < -1 || s->distortion > 2)
        return sp_error_set(err, SP_ERR_INPUT, "%s: distortion terms must be -1 (auto), 0, 1 or 2", image);
    if ((rc = sp_still_read(image, &im, NULL, 0, err)))
        goto fail;
    res->width = im.width;
    res->height = im.height;
    if (s->two_point) {
        rc = two_point(s, image, res, err);
        goto fail;
    }
    if ((rc = sp_dots_find(&im, s->polarity, s->min_dot_px > 0 ? s->min_dot_px : 4, &dots, &nd, &pol, image,
                           err)))
        goto fail;
    if ((rc = sp_lattice_index(dots, nd, s->min_dots, &ni, image, err)))
        goto fail;
    sp_grid_fit f;
    if ((rc = sp_grid_fit_run(dots, nd, s->pitch_mm, im.width, im.height, s->distortion, &f, image, err)))
        goto fail;
    strcpy(res->method, "grid");
    res->mm_per_px = f.mm_per_px;
    res->mm_per_px_uncertainty = f.mm_per_px_u;
    res->rotation_deg = f.rotation_deg;
    res->rotation_uncertainty_deg = f.rotation_u_deg;
    res->pitch_mm = s->pitch_mm;
    res->polarity = pol;
    res->dots_found = nd;
    res->dots_used = ni;
    res->rms_px = f.rms_px;
    res->max_px = f.max_px;
    res->scale_x_mm_per_px = f.scale_x;
    res->scale_y_mm_per_px = f.scale_y;
    res->scale_variation = f.scale_variation;
    res->has_homography = 1;
    memcpy(res->homography, f.H, sizeof f.H);
    res->radial = f.radial;
fail:
    free(dots);
    sp_image_free(&im);
    return rc;
}

int sp_calib_undistort(const sp_calib_result *r, double x, double y, double *xu, double *yu)
{
    return sp_radial_invert(&r->radial, x, y, xu, yu);
}
