/* The lattice of a dot-grid target: integer indices for the dots, then the mapping from grid
 * millimetres to pixels (a homography, optionally followed by radial distortion) by least squares. */
#ifndef SP_CALIB_LATTICE_H
#define SP_CALIB_LATTICE_H

#include "calib/dots.h"

/* Assign lattice indices (dots[k].i, .j, .indexed) by growing from the dot nearest the middle of
 * the set along the two lattice vectors. i runs along the lattice direction nearest to image +x
 * (so rotations are reported in (-45°, 45°]), j along the direction 90° counter-clockwise from it
 * with y up. Returns SP_ERR_INPUT (naming `what`) when fewer than min_dots dots lie on one regular
 * lattice spanning at least 3×3 nodes, or when the indices contradict each other. */
int sp_lattice_index(sp_dot *dots, int n, int min_dots, int *n_indexed, const char *what, sp_error *err);

/* Radial distortion (Brown 1966 after Conrady 1919), in the direction undistorted -> observed:
 * p_d = c + (p_u − c)·(1 + k1·ρ² + k2·ρ⁴), ρ = |p_u − c| / norm. */
typedef struct sp_radial {
    int terms; /* 0, 1 or 2 coefficients in use */
    double k1, k2;
    double cx, cy;  /* centre (the image centre), pixels */
    double norm_px; /* ρ normaliser: half the image diagonal */
} sp_radial;

void sp_radial_apply(const sp_radial *d, double xu, double yu, double *xd, double *yd);
/* Inverse by Newton's method on the radius; returns 0, or -1 when it does not converge. */
int sp_radial_invert(const sp_radial *d, double xd, double yd, double *xu, double *yu);

typedef struct sp_grid_fit {
    double H[9]; /* grid mm (x right, y up) -> undistorted pixels, row-major, H[8] = 1 */
    sp_radial radial;
    int n;                 /* points used */
    double rms_px, max_px; /* reprojection residuals */
    double mm_per_px;      /* at the image centre: 1/sqrt|det J|, J = d(px)/d(mm) there */
    double mm_per_px_u;    /* standard uncertainty (1 sigma) from the parameter covariance */
    double rotation_deg;   /* direction of grid +x in the image at the centre, counter-clockwise, y up */
    double rotation_u_deg;
    double scale_x, scale_y; /* mm per px along the grid axes at the centre */
    double scale_variation;  /* (max − min)/centre of the local mm_per_px at the four image corners */
    double f_stat[2];        /* F statistics of the first and second distortion terms (0 if not tried) */
} sp_grid_fit;

/* Fit the indexed dots (grid position i·pitch, j·pitch mm). max_terms: radial terms allowed
 * (0..2); -1 = choose by F-test (see docs/methods-calib.md). w, h: image size. */
int sp_grid_fit_run(const sp_dot *dots, int n, double pitch_mm, int w, int h, int max_terms, sp_grid_fit *out,
                    const char *what, sp_error *err);

/* Map a grid point (mm) to observed pixels with a fit. */
void sp_grid_fit_project(const sp_grid_fit *f, double X, double Y, double *x, double *y);

#endif
