/*
 * calibration/camera.h - the camera model of a flat conveyor: pixels to
 * millimetres on the conveyor plane and back, with lens distortion.
 *
 * Model. A point (X, Y) on the conveyor plane, in mm, is seen at the
 * distorted (observed) pixel
 *     x_u = H (X, Y, 1)^T               plane -> ideal (undistorted) pixel,
 *                                        a 3x3 homography (h33 = 1)
 *     u   = (x_u - c) / rho              normalised image coordinates
 *     d   = D(u)                         lens distortion
 *     x_d = c + rho d                    observed pixel
 * with the distortion of Brown (Photogrammetric Engineering 32(3), 1966),
 * after Conrady (1919), radial terms k1, k2 and tangential (decentring)
 * terms p1, p2; for u = (u, v), r^2 = u^2 + v^2:
 *     D_u = u (1 + k1 r^2 + k2 r^4) + 2 p1 u v + p2 (r^2 + 2 u^2)
 *     D_v = v (1 + k1 r^2 + k2 r^4) + p1 (r^2 + 2 v^2) + 2 p2 u v
 * (the form OpenCV documents for its first four coefficients). Here the
 * distortion centre c = (cx, cy) is the frame centre ((W-1)/2, (H-1)/2)
 * (pixel centres at integers), and rho, the normalisation radius, is half
 * the frame diagonal, sqrt(W^2 + H^2) / 2: so r = 1 at the frame corners
 * and k1 is the fractional radial displacement there. (OpenCV normalises
 * by the focal length instead, so its coefficients differ from ours by
 * powers of rho / f.) A decentred lens shows up in p1, p2.
 *
 * Plane coordinates are those of the target as it lay in the first frame
 * of the calibration: origin at the centre of its dot of row 0, column 0,
 * X along its rows, Y along its columns (calibration/target.h).
 *
 * Estimation (mb_calib_estimate): from one or several frames of the target
 * lying flat on the conveyor, each moved and turned on the plane. Unknowns:
 * H (8), the distortion (up to 4), and for every frame after the first the
 * target's rigid pose on the plane (angle, shift: 3). Initialised by the
 * normalised DLT of each frame (Hartley & Zisserman, Multiple View Geometry,
 * 2nd ed. 2004, section 4.4 - Hartley, IEEE PAMI 19(6), 1997) with no
 * distortion, then refined by Levenberg-Marquardt on the reprojection
 * error (Levenberg 1944; Marquardt 1963; scaling and stopping rules after
 * More, "The Levenberg-Marquardt algorithm: implementation and theory",
 * in Numerical Analysis, ed. G. A. Watson, Springer 1978, pp. 105-116).
 * This is the plane-based approach of Zhang (IEEE PAMI 22(11), 2000) kept
 * to one plane, where the plane-to-image map needs no intrinsic/extrinsic
 * split.
 * The centre of an imaged dot (area centroid of its dark blob) is not the
 * image of the dot's centre under perspective and distortion; the fit
 * corrects each observation by the offset the current model predicts
 * between the two (the centroid of the imaged circle's outline polygon,
 * 64 vertices), a few passes (cf. Heikkila, IEEE PAMI 22(10), 2000).
 *
 * Coordinates: px with x right, y down, pixel centres at integers; mm on
 * the plane. Nothing here allocates except mb_calib_estimate.
 */
#ifndef MB_CAMERA_H
#define MB_CAMERA_H

/** Most frames one calibration uses. */
#define MB_CALIB_MAX_FRAMES 32
/** Most observations (points x frames) one calibration uses. */
#define MB_CALIB_MAX_OBS 20000

/**
 * A calibration: plain values that a document can hold (io/calib_file.h).
 * Fill by mb_calib_estimate or by reading a document; check a filled one
 * with mb_calib_validate before use.
 */
typedef struct {
    int width, height; /**< px: frames this calibration applies to */
    double h[9];       /**< plane (mm) -> undistorted image (px), 3x3,
                            column-major (entry (r, c) is h[r + 3 c]),
                            h[8] = 1 */
    double cx, cy;     /**< distortion centre, px */
    double radius;     /**< normalisation radius rho, px */
    double k1, k2;     /**< radial distortion (dimensionless) */
    double p1, p2;     /**< tangential distortion (dimensionless) */

    /* What it was made from (for the document and for a person). */
    int rows, cols;  /**< target dots */
    double pitch;    /**< target pitch, mm */
    int n_frames;    /**< frames used, 1..MB_CALIB_MAX_FRAMES */
    int n_points;    /**< dots per frame */
    double rms_px;   /**< reprojection RMS over all dots, px:
                          sqrt(sum |e|^2 / count), e the 2-D residual */
    double worst_px; /**< largest |e|, px */
    int worst_frame; /**< its frame (0-based) */
    int worst_point; /**< its dot, index row * cols + col (0-based) */
    double coverage; /**< fraction of the frame inside the convex hull of
                          all dots seen: distortion outside it is
                          extrapolated */
    /** RMS per frame, px. */
    double frame_rms_px[MB_CALIB_MAX_FRAMES];
    /** The target's turn on the plane relative to frame 0, degrees. */
    double frame_angle_deg[MB_CALIB_MAX_FRAMES];
    /** And its shift, mm: where its dot (row 0, column 0) lies on the
        plane, so a target point Q is at R(angle) Q + shift. */
    double frame_shift_mm[MB_CALIB_MAX_FRAMES][2];
    int iterations;   /**< Levenberg-Marquardt iterations, all passes */
    char created[32]; /**< UTC date "YYYY-MM-DDTHH:MM:SSZ", set by the
                           caller (the library reads no clock) */
} mb_calib;

/** What mb_calib_estimate fits. */
typedef struct {
    int width, height;       /**< px, of every frame */
    int n_frames;            /**< 1..MB_CALIB_MAX_FRAMES */
    int n_points;            /**< dots per frame, >= 8 */
    const double *target_xy; /**< 2 n_points: x0, y0, x1, ... in target mm */
    const double *image_xy;  /**< 2 n_points n_frames px: frame 0 first,
                                  points in target_xy's order */
    double dot_radius;       /**< mm: radius of the circular dots, for the
                                  centroid offset correction; 0 = none */
    int rows, cols;          /**< copied into the result (0 if no grid) */
    double pitch;            /**< mm, copied into the result */
} mb_calib_problem;

/** Options of mb_calib_estimate; mb_calib_options_default fills them. */
typedef struct {
    int radial_terms;   /**< 0, 1 (k1) or 2 (k1, k2); default 2 */
    int tangential;     /**< 1: estimate p1, p2; default 1 */
    int max_iterations; /**< per Levenberg-Marquardt pass; default 200 */
    int bias_passes;    /**< centroid offset corrections after the first
                             pass (0 = none); default 2 */
} mb_calib_options;

/** Local scale of the px -> mm map at one pixel. */
typedef struct {
    double mm_per_px;     /**< sqrt(|det J|): the areal mean */
    double mm_per_px_min; /**< smallest singular value of J */
    double mm_per_px_max; /**< largest singular value of J */
    double jacobian[4];   /**< J = d(X, Y)/d(x, y), column-major, mm/px */
} mb_calib_scale;

void mb_calib_options_default(mb_calib_options *opt);

/**
 * Fit the model to the dots of one or several frames.
 * out gets the model, the residual summary and prob's rows, cols, pitch;
 * out->created is left empty. residuals, when not NULL, gets 2 values per
 * observation (predicted - observed, px, in image_xy's order).
 * Return value: 0; MB_EINVAL (NULL, sizes out of range); MB_EDEGENERATE
 * (a frame's dots are collinear or too few, or a frame shows the target
 * mirrored relative to frame 0); MB_ENUMERIC (a non-finite coordinate, or
 * LAPACK failed); MB_ENOCONV (Levenberg-Marquardt hit its iteration cap
 * or could no longer reduce the error); MB_ERANGE (the fitted distortion
 * folds over inside the frame); MB_ENOMEM. err gets a sentence.
 */
int mb_calib_estimate(const mb_calib_problem *prob, const mb_calib_options *opt,
                      mb_calib *out, double *residuals, char *err);

/**
 * Check a filled calibration: positive frame size, finite values, a
 * positive radius, an invertible homography whose plane horizon lies
 * outside the frame, and a distortion that neither folds over nor fails to
 * invert anywhere in the frame.
 * Return value: 0; MB_EINVAL (NULL); MB_ENUMERIC (non-finite value);
 * MB_ERANGE (any other failed check). err says which.
 */
int mb_calib_validate(const mb_calib *cal, char *err);

/**
 * Refuse a calibration for frames of another size.
 * Return value: 0; MB_EINVAL (NULL); MB_ESIZE, with a sentence naming
 * both sizes.
 */
int mb_calib_check_frame(const mb_calib *cal, int width, int height, char *err);

/** Apply the distortion: undistorted px -> observed px. */
void mb_calib_distort(const mb_calib *cal, double xu, double yu, double *xd,
                      double *yd);

/**
 * Remove the distortion: observed px -> undistorted px, by Newton's method
 * on D (at most 50 steps, to 1e-12 of rho).
 * Return value: 0; MB_ENOCONV (no convergence: a point far outside the
 * frame, or a distortion that folds there).
 */
int mb_calib_undistort(const mb_calib *cal, double xd, double yd, double *xu,
                       double *yu);

/**
 * Observed px -> plane mm. Return value: 0; MB_ENOCONV (as undistort);
 * MB_ERANGE (the pixel looks at or beyond the plane's horizon).
 */
int mb_calib_px_to_mm(const mb_calib *cal, double x, double y, double *X,
                      double *Y);

/**
 * Plane mm -> observed px. Return value: 0; MB_ERANGE (the point is on or
 * behind the horizon: it cannot be seen).
 */
int mb_calib_mm_to_px(const mb_calib *cal, double X, double Y, double *x,
                      double *y);

/**
 * n points xy_px (x0, y0, x1, ...) to mm into xy_mm (may be the same
 * array). Return value: 0, or the first failing point's code (the points
 * before it are converted).
 */
int mb_calib_points_to_mm(const mb_calib *cal, int n, const double *xy_px,
                          double *xy_mm);

/** Local scale of px -> mm at the observed pixel (x, y). Return value: 0;
    codes as mb_calib_px_to_mm. */
int mb_calib_local_scale(const mb_calib *cal, double x, double y,
                         mb_calib_scale *out);

/**
 * Homography from n >= 4 point pairs, src -> dst (x0, y0, x1, ...), by the
 * normalised direct linear transform (Hartley & Zisserman, section 4.4):
 * each set moved to its centroid and scaled to a mean distance of sqrt(2),
 * the smallest right singular vector of the 2n x 9 system (LAPACKE_dgesvd),
 * un-normalised and scaled to h[8] = 1 (column-major like mb_calib.h).
 * Return value: 0; MB_EINVAL; MB_EDEGENERATE (fewer than 4 points, all
 * points coincident or collinear, or h33 = 0); MB_ENUMERIC; MB_ENOMEM.
 */
int mb_calib_homography_dlt(int n, const double *src, const double *dst,
                            double h[9]);

/** Apply a column-major homography to (x, y). Returns the homogeneous w
    (the point is valid when w != 0; same sign as h[8] in front). */
double mb_calib_homography_apply(const double h[9], double x, double y,
                                 double *ox, double *oy);

/** Invert a 3x3 column-major matrix, scaled so inv[8] = 1 when that is
    not 0. Return value: 0; MB_EDEGENERATE (singular). */
int mb_calib_homography_invert(const double h[9], double inv[9]);

#endif
