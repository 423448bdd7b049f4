#include "calib/calfile.h"

#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#define NUM(x) json_real(isfinite(x) ? (x) : 0.0)

int sp_calfile_write(const char *path, const sp_calib_result *r, sp_error *err)
{
    int rc = SP_OK;
    char tmp[4200];
    json_t *root = json_object(), *a = NULL;
    if (!root)
        return sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
    int n = snprintf(tmp, sizeof tmp, "%s.%ld.partial", path, (long)getpid());
    if (n < 0 || (size_t)n >= sizeof tmp) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: path too long", path);
        goto fail;
    }
    int bad = 0;
    bad |= json_object_set_new(root, "tool", json_string("spume " SP_VERSION));
    bad |= json_object_set_new(root, "method", json_string(r->method));
    bad |= json_object_set_new(root, "image", json_string(r->image));
    bad |= json_object_set_new(root, "width", json_integer(r->width));
    bad |= json_object_set_new(root, "height", json_integer(r->height));
    bad |= json_object_set_new(root, "mm_per_px", NUM(r->mm_per_px));
    bad |= json_object_set_new(root, "mm_per_px_uncertainty", NUM(r->mm_per_px_uncertainty));
    bad |= json_object_set_new(root, "rotation_deg", NUM(r->rotation_deg));
    bad |= json_object_set_new(root, "rotation_uncertainty_deg", NUM(r->rotation_uncertainty_deg));
    if (!strcmp(r->method, "grid")) {
        bad |= json_object_set_new(root, "pitch_mm", NUM(r->pitch_mm));
        bad |= json_object_set_new(root, "dots", json_string(r->polarity == 2 ? "light" : "dark"));
        bad |= json_object_set_new(root, "dots_found", json_integer(r->dots_found));
        bad |= json_object_set_new(root, "dots_used", json_integer(r->dots_used));
        bad |= json_object_set_new(root, "residual_rms_px", NUM(r->rms_px));
        bad |= json_object_set_new(root, "residual_max_px", NUM(r->max_px));
        bad |= json_object_set_new(root, "scale_x_mm_per_px", NUM(r->scale_x_mm_per_px));
        bad |= json_object_set_new(root, "scale_y_mm_per_px", NUM(r->scale_y_mm_per_px));
        bad |= json_object_set_new(root, "scale_variation", NUM(r->scale_variation));
    }
    if (r->has_homography) {
        bad |= json_object_set_new(root, "homography", a = json_array());
        for (int k = 0; k < 9 && a; k++)
            bad |= json_array_append_new(a, NUM(r->homography[k]));
    }
    if (!strcmp(r->method, "grid")) {
        json_t *d = json_object(), *c = json_array();
        bad |= json_object_set_new(root, "distortion", d);
        if (d && c) {
            bad |= json_object_set_new(d, "model",
                                       json_string(r->radial.terms > 0 ? "radial_polynomial" : "none"));
            bad |= json_object_set_new(d, "terms", json_integer(r->radial.terms));
            bad |= json_object_set_new(d, "k1", NUM(r->radial.k1));
            bad |= json_object_set_new(d, "k2", NUM(r->radial.k2));
            bad |= json_array_append_new(c, NUM(r->radial.cx));
            bad |= json_array_append_new(c, NUM(r->radial.cy));
            bad |= json_object_set_new(d, "centre_px", c);
            bad |= json_object_set_new(d, "norm_px", NUM(r->radial.norm_px));
        } else {
            json_decref(c);
            bad = 1;
        }
    }
    if (!strcmp(r->method, "two_point")) {
        bad |= json_object_set_new(root, "points_px", a = json_array());
        for (int k = 0; k < 4 && a; k++)
            bad |= json_array_append_new(a, NUM(r->points[k]));
        bad |= json_object_set_new(root, "length_mm", NUM(r->length_mm));
    }
    if (bad) {
        rc = sp_error_set(err, SP_ERR_INTERNAL, "%s: out of memory", path);
        goto fail;
    }
    if (json_dump_file(root, tmp, JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(17)) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot write: %s", path, strerror(errno));
        unlink(tmp);
        goto fail;
    }
    if (rename(tmp, path) != 0) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: cannot rename into place: %s", path, strerror(errno));
        unlink(tmp);
        goto fail;
    }
fail:
    json_decref(root);
    return rc;
}

/* A finite number under key k, or an error naming the file and the key. */
static int get_num(json_t *o, const char *k, int required, double *v, int *present, const char *path,
                   sp_error *err)
{
    json_t *x = json_object_get(o, k);
    if (present)
        *present = x != NULL;
    if (!x) {
        if (required)
            return sp_error_set(err, SP_ERR_INPUT, "%s: missing key \"%s\"", path, k);
        return SP_OK;
    }
    if (!json_is_number(x))
        return sp_error_set(err, SP_ERR_INPUT, "%s: key \"%s\" is not a number", path, k);
    *v = json_number_value(x);
    if (!isfinite(*v))
        return sp_error_set(err, SP_ERR_INPUT, "%s: key \"%s\" is not finite", path, k);
    return SP_OK;
}

int sp_calfile_read(const char *path, sp_calib_result *r, sp_error *err)
{
    int rc = SP_OK, have = 0;
    json_error_t je;
    memset(r, 0, sizeof *r);
    json_t *root = json_load_file(path, JSON_REJECT_DUPLICATES, &je);
    if (!root)
        return sp_error_set(err, SP_ERR_INPUT, "%s: not a calibration file: %s (line %d)", path, je.text,
                            je.line);
    if (!json_is_object(root)) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: not a calibration file (the top level is not an object)",
                          path);
        goto fail;
    }
    if ((rc = get_num(root, "mm_per_px", 1, &r->mm_per_px, NULL, path, err)) ||
        (rc = get_num(root, "mm_per_px_uncertainty", 1, &r->mm_per_px_uncertainty, NULL, path, err)) ||
        (rc = get_num(root, "rotation_deg", 1, &r->rotation_deg, NULL, path, err)))
        goto fail;
    if (!(r->mm_per_px > 0) || r->mm_per_px > 1000) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"mm_per_px\" is %g (must be in (0, 1000])", path,
                          r->mm_per_px);
        goto fail;
    }
    if (r->mm_per_px_uncertainty < 0 || r->mm_per_px_uncertainty >= r->mm_per_px) {
        rc = sp_error_set(err, SP_ERR_INPUT,
                          "%s: key \"mm_per_px_uncertainty\" is %g (must be in [0, mm_per_px))", path,
                          r->mm_per_px_uncertainty);
        goto fail;
    }
    if (fabs(r->rotation_deg) > 180) {
        rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"rotation_deg\" is %g (must be within ±180)", path,
                          r->rotation_deg);
        goto fail;
    }
    if ((rc = get_num(root, "rotation_uncertainty_deg", 0, &r->rotation_uncertainty_deg, NULL, path, err)))
        goto fail;
    json_t *m = json_object_get(root, "method");
    snprintf(r->method, sizeof r->method, "%s", json_is_string(m) ? json_string_value(m) : "unknown");
    json_t *im = json_object_get(root, "image");
    if (json_is_string(im))
        snprintf(r->image, sizeof r->image, "%s", json_string_value(im));
    double v = 0;
    if ((rc = get_num(root, "width", 0, &v, &have, path, err)))
        goto fail;
    if (have)
        r->width = v >= 1 && v <= SP_MAX_DIM ? (int)v : 0;
    if ((rc = get_num(root, "height", 0, &v, &have, path, err)))
        goto fail;
    if (have)
        r->height = v >= 1 && v <= SP_MAX_DIM ? (int)v : 0;
    get_num(root, "pitch_mm", 0, &r->pitch_mm, NULL, path, NULL);

    json_t *h = json_object_get(root, "homography");
    if (h) {
        if (!json_is_array(h) || json_array_size(h) != 9) {
            rc =
                sp_error_set(err, SP_ERR_INPUT, "%s: key \"homography\" must be an array of 9 numbers", path);
            goto fail;
        }
        for (int k = 0; k < 9; k++) {
            json_t *x = json_array_get(h, (size_t)k);
            if (!json_is_number(x) || !isfinite(json_number_value(x))) {
                rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"homography\" must be an array of 9 numbers",
                                  path);
                goto fail;
            }
            r->homography[k] = json_number_value(x);
        }
        r->has_homography = 1;
    }
    json_t *d = json_object_get(root, "distortion");
    if (d) {
        if (!json_is_object(d)) {
            rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"distortion\" is not an object", path);
            goto fail;
        }
        json_t *model = json_object_get(d, "model");
        const char *ms = json_is_string(model) ? json_string_value(model) : NULL;
        if (!ms || (strcmp(ms, "none") && strcmp(ms, "radial_polynomial"))) {
            rc = sp_error_set(err, SP_ERR_INPUT,
                              "%s: key \"distortion.model\" must be \"none\" or \"radial_polynomial\"", path);
            goto fail;
        }
        if (!strcmp(ms, "radial_polynomial")) {
            json_t *c = json_object_get(d, "centre_px");
            if ((rc = get_num(d, "k1", 1, &r->radial.k1, NULL, path, err)) ||
                (rc = get_num(d, "k2", 1, &r->radial.k2, NULL, path, err)) ||
                (rc = get_num(d, "norm_px", 1, &r->radial.norm_px, NULL, path, err)))
                goto fail;
            if (!json_is_array(c) || json_array_size(c) != 2 || !json_is_number(json_array_get(c, 0)) ||
                !json_is_number(json_array_get(c, 1))) {
                rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"distortion.centre_px\" must be [x, y]", path);
                goto fail;
            }
            r->radial.cx = json_number_value(json_array_get(c, 0));
            r->radial.cy = json_number_value(json_array_get(c, 1));
            /* |k| up to 0.5 is already a fish-eye; beyond, the model is not invertible at the corners. */
            if (!(r->radial.norm_px > 0) || fabs(r->radial.k1) > 0.5 || fabs(r->radial.k2) > 0.5 ||
                !isfinite(r->radial.cx) || !isfinite(r->radial.cy)) {
                rc = sp_error_set(err, SP_ERR_INPUT, "%s: key \"distortion\" holds absurd values", path);
                goto fail;
            }
            r->radial.terms = r->radial.k2 != 0 ? 2 : 1;
        }
    }
fail:
    json_decref(root);
    return rc;
}
