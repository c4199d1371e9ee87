/*
 * tests/calibration/render_target.h - frames of the calibration target
 * (calibration/target.h) through a known camera: plane homography, Brown-
 * Conrady distortion, blur, uneven light and sensor noise. The ground truth
 * for the calibration tests.
 *
 * The camera is a pinhole: focal length f px, principal point at the
 * frame centre ((W-1)/2, (H-1)/2), no skew; it looks at the conveyor plane
 * from height `height_mm` (distance along the optical axis to the target's
 * centre), tilted by `tilt_x_deg` about the image x axis and `tilt_y_deg`
 * about the image y axis, turned by `roll_deg` about the optical axis.
 * Plane coordinates are those of the target in frame 0 (target.h); in this
 * frame the target lies turned by `angle_deg` and shifted by `shift_mm` on
 * the plane: P = R(angle) Q + shift for a target point Q.
 * The distortion uses calibration/camera.h's definition (centre at the
 * frame centre, radius half the frame diagonal) and is implemented here
 * again, independently, so the tests do not check the code against itself.
 *
 * Pixels: the sheet is white, ink black, the conveyor around it a mid grey;
 * a pixel is the mean of s x s samples where a dot, mark or the sheet's
 * edge passes within a pixel of it (else one sample); then light falls off
 * towards the corners (multiplicative), then Gaussian blur, then Gaussian
 * noise, rounded to 8 bits.
 */
#ifndef MB_TEST_RENDER_TARGET_H
#define MB_TEST_RENDER_TARGET_H

#include <stdint.h>

#include "image.h"
#include "target.h"

typedef struct {
    int width, height; /**< px */
    double f;          /**< focal length, px */
    double height_mm;  /**< camera to target centre along the axis, mm */
    double tilt_x_deg, tilt_y_deg, roll_deg;
    double k[4];         /**< k1, k2, p1, p2 (camera.h's normalisation) */
    double angle_deg;    /**< target's turn on the plane (frame pose) */
    double shift_mm[2];  /**< and shift */
    double centre_px[2]; /**< where the target centre of frame 0's pose is
                              seen (before distortion); default frame
                              centre when both are 0 */
    double white, black, conveyor; /**< grey levels */
    double margin_pitch; /**< white sheet around the outer dot centres, in
                              pitches (1.5 as printed) */
    double vignette;     /**< corners darker by this fraction */
    double blur;         /**< Gaussian blur sigma, px (0 = none) */
    double noise;        /**< Gaussian noise sigma, grey levels */
    int supersample;     /**< samples per axis near edges (8) */
    int no_marks;        /**< 1: draw the dots only (a foreign target) */
    uint64_t seed;       /**< noise seed */
} rt_scene;

/** Defaults: 800 x 600, f 1000, 250 mm height (0.25 mm/px at the centre),
    no tilt, no distortion, white 220, black 25, conveyor 90, margin 1.5,
    no light fall-off, no blur, no noise, 8 x 8 samples, seed 1. */
void rt_scene_default(rt_scene *sc);

/** The tilted camera with lens distortion of the detection tests: the
    defaults, tilted 8 deg about x, -5 deg about y, rolled 3 deg, distortion
    k = (-0.08, 0.02, 0.002, -0.001), blur 0.7 px. */
void rt_scene_tilted(rt_scene *sc);

/** Pose the target in sc: turned about its centre by a degrees and the
    centre moved by (dx, dy) mm (sets angle_deg and shift_mm). */
void rt_scene_pose(rt_scene *sc, const mb_target *t, double a, double dx, double dy);

/** The true plane (mm, frame-0 target coordinates) -> undistorted px
    homography of the scene, column-major, h[8] = 1. */
void rt_homography(const rt_scene *sc, const mb_target *t, double h[9]);

/** Where target point (qx, qy) mm is seen in this frame (observed px). */
void rt_project(const rt_scene *sc, const mb_target *t, double qx, double qy,
                double *x, double *y);

/** Which plane point (mm, frame-0 coordinates) pixel (x, y) sees. Returns
    0, or -1 when the inversion fails. */
int rt_plane_of_px(const rt_scene *sc, const mb_target *t, double x, double y,
                   double *X, double *Y);

/** True local scale sqrt(|det d(X,Y)/d(x,y)|) mm per px at pixel (x, y),
    by central differences of rt_plane_of_px. */
double rt_mm_per_px(const rt_scene *sc, const mb_target *t, double x, double y);

/** Area centroid of the image of dot (r, c) (polygon of 256 vertices):
    where an exact centroid detector would put the dot. */
void rt_dot_centroid(const rt_scene *sc, const mb_target *t, int r, int c,
                     double *x, double *y);

/** Render one frame into a new image (mb_image_alloc). Returns 0 or -1. */
int rt_render(const rt_scene *sc, const mb_target *t, mb_image *out);

#endif
