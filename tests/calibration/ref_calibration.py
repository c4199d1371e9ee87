#!/usr/bin/python3
"""Reference check of the calibration (calibration/detect.h, camera.h)
against OpenCV (Debian's python3-opencv) and the renderer's ground truth.

calib_ref_driver renders two sets of four 800 x 600 frames of our target
through a known camera (tilted, Brown-Conrady distortion k1 -0.08, k2 0.02,
p1 0.002, p2 -0.001 in our normalisation), detects and calibrates them with
our code, and writes the frames, the truth and our figures. Here the same
frames go through OpenCV:
  - cv2.findCirclesGrid (SimpleBlobDetector, sized to skip our small marks)
    for OpenCV's own dot centres;
  - cv2.calibrateCamera on OpenCV's centres and on ours (the same model
    family: focal length and principal point held at the truth, because
    frames of one nearly fronto-parallel plane determine them poorly:
    Zhang, IEEE PAMI 22(11), 2000, section 3.3 - from memory - shows that
    a plane parallel to an earlier one adds no constraint; k1, k2, p1, p2
    and a pose per frame estimated);
  - cv2.findHomography on our centres of the first frame (no distortion).
For each: reprojection RMS (OpenCV's definition: sqrt(sum |e|^2 / points),
the same as ours) and the local scale (mm per px) at the frame centre and
four points between centre and corners, against the truth.

Asserted on the noise-free set (issue 6): our scale within 0.05 % of the
truth and our RMS under 0.05 px. Asserted on both sets: our RMS is not
worse than OpenCV's calibrateCamera on the same centres (x 1.5 + 0.005 px),
and OpenCV's fit of our centres reproduces the true scale within 0.05 % on
the noise-free set (which checks the renderer's distortion against
OpenCV's definition of the same coefficients). The rest is printed.
usage: ref_calibration.py DRIVER SCRATCH_DIR"""
import json
import os
import shutil
import subprocess
import sys

import cv2
import numpy as np

driver, scratch = sys.argv[1], sys.argv[2]
shutil.rmtree(scratch, ignore_errors=True)
os.makedirs(scratch)
subprocess.run([driver, "run", scratch], check=True)
ref = json.load(open(os.path.join(scratch, "ref.json")))

W, H = ref["width"], ref["height"]
R, C, pitch = ref["rows"], ref["cols"], ref["pitch"]
tr = ref["truth"]
f, cx, cy, rho = tr["f"], tr["cx"], tr["cy"], tr["radius"]
k1, k2, p1, p2 = tr["k"]
# Our coefficients in OpenCV's normalisation (by f instead of rho):
# u = x' f / rho, so k1' = k1 (f/rho)^2, k2' = k2 (f/rho)^4, p' = p f/rho.
a = f / rho
cv_truth = [k1 * a * a, k2 * a ** 4, p1 * a, p2 * a]
test_pts = np.array(ref["test_points"], dtype=np.float64)
truth_scale = np.array(ref["truth_scale"])
truth_plane = np.array(ref["truth_plane"])
objp = np.array([[c * pitch, r * pitch, 0.0] for r in range(R) for c in range(C)],
                dtype=np.float32)
K0 = np.array([[f, 0, cx], [0, f, cy], [0, 0, 1]], dtype=np.float64)
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def opencv_centres(path, ours):
    """cv2.findCirclesGrid's centres, put in our order by nearest match."""
    img = cv2.imread(path, cv2.IMREAD_GRAYSCALE)
    d = np.linalg.norm(ours[1] - ours[0])  # pitch in px near dot (0, 0)
    area = np.pi * (0.25 * d) ** 2
    p = cv2.SimpleBlobDetector_Params()
    p.filterByArea, p.minArea, p.maxArea = True, 0.75 * area, 4.0 * area
    p.filterByCircularity = p.filterByConvexity = p.filterByInertia = False
    p.filterByColor, p.blobColor = True, 0
    det = cv2.SimpleBlobDetector_create(p)
    for size in ((C, R), (R, C)):
        ok, c = cv2.findCirclesGrid(img, size, flags=cv2.CALIB_CB_SYMMETRIC_GRID,
                                    blobDetector=det)
        if ok:
            c = c.reshape(-1, 2).astype(np.float64)
            dist = np.linalg.norm(ours[:, None, :] - c[None, :, :], axis=2)
            idx = dist.argmin(axis=1)
            if len(set(idx)) == len(idx) and dist.min(axis=1).max() < 0.25 * d:
                return c[idx]
    return None


def cv_calibrate(centres):
    """calibrateCamera with f and the principal point held at the truth."""
    flags = (cv2.CALIB_USE_INTRINSIC_GUESS | cv2.CALIB_FIX_FOCAL_LENGTH |
             cv2.CALIB_FIX_PRINCIPAL_POINT | cv2.CALIB_FIX_ASPECT_RATIO |
             cv2.CALIB_FIX_K3)
    crit = (cv2.TERM_CRITERIA_COUNT + cv2.TERM_CRITERIA_EPS, 200, 1e-15)
    rms, K, dist, rvecs, tvecs = cv2.calibrateCamera(
        [objp] * len(centres), [c.reshape(-1, 1, 2).astype(np.float32) for c in centres],
        (W, H), K0.copy(), np.zeros(5), flags=flags, criteria=crit)
    Rm, _ = cv2.Rodrigues(rvecs[0])
    Hn = np.column_stack([Rm[:, 0], Rm[:, 1], tvecs[0].ravel()])
    Hi = np.linalg.inv(Hn)
    crit_u = (cv2.TERM_CRITERIA_COUNT + cv2.TERM_CRITERIA_EPS, 200, 1e-15)

    def plane(px):
        n = cv2.undistortPointsIter(px.reshape(-1, 1, 2).astype(np.float64), K, dist,
                                    None, None, crit_u).reshape(-1, 2)
        q = Hi @ np.vstack([n.T, np.ones(len(n))])
        return (q[:2] / q[2]).T
    return rms, dist.ravel()[:4], plane


def homography_plane(centres):
    Hm, _ = cv2.findHomography(centres.astype(np.float64), objp[:, :2].astype(np.float64), 0)

    def plane(px):
        q = Hm @ np.vstack([px.T, np.ones(len(px))])
        return (q[:2] / q[2]).T
    return plane


def scale_and_plane(plane):
    """mm per px (sqrt |det J|, central differences of 0.5 px) and the plane
    position at the test points."""
    e = 0.5
    out = []
    for x, y in test_pts:
        pts = np.array([[x + e, y], [x - e, y], [x, y + e], [x, y - e]])
        q = plane(pts)
        J = np.column_stack([(q[0] - q[1]) / (2 * e), (q[2] - q[3]) / (2 * e)])
        out.append(np.sqrt(abs(np.linalg.det(J))))
    return np.array(out), plane(test_pts)


def row(name, rms, scale, pos):
    err = np.abs(scale / truth_scale - 1).max() * 100
    perr = np.linalg.norm(pos - truth_plane, axis=1).max()
    rms_s = f"{rms:8.4f}" if rms is not None else "       -"
    print(f"  {name:44s} {rms_s}  {err:9.4f}  {perr:9.4f}")
    return err


print(f"truth in OpenCV's normalisation: k1 {cv_truth[0]:.5f} k2 {cv_truth[1]:.5f} "
      f"p1 {cv_truth[2]:.6f} p2 {cv_truth[3]:.6f}")
for s in ref["sets"]:
    name = s["name"]
    ours_c = [np.array(c, dtype=np.float64) for c in s["centres"]]
    true_c = [np.array(c, dtype=np.float64) for c in s["true_centroids"]]
    print(f"\n{name} frames (noise {s['noise']}, blur {s['blur']} px, "
          f"light fall-off {s['vignette']}):")
    cv_c = [opencv_centres(os.path.join(scratch, fr), oc)
            for fr, oc in zip(s["frames"], ours_c)]
    found = [c is not None for c in cv_c]
    e_ours = np.sqrt(np.mean([np.sum((o - t) ** 2, axis=1).mean()
                              for o, t in zip(ours_c, true_c)]))
    print(f"  dot centres vs true centroids: ours RMS {e_ours:.4f} px", end="")
    if all(found):
        e_cv = np.sqrt(np.mean([np.sum((o - t) ** 2, axis=1).mean()
                                for o, t in zip(cv_c, true_c)]))
        print(f", cv2.findCirclesGrid RMS {e_cv:.4f} px")
    else:
        print(f", cv2.findCirclesGrid found {sum(found)} of {len(found)} grids")
    print(f"  {'':44s} {'RMS px':>8s}  {'scale err':>9s}  {'pos. err':>9s}")
    print(f"  {'':44s} {'':>8s}  {'max %':>9s}  {'max mm':>9s}")
    o = s["ours"]
    ours_err = row("ours (our centres, our model)", o["rms"], np.array(o["scale"]),
                   np.array(o["plane"]))
    rms_cvo, dist_cvo, plane_cvo = cv_calibrate(ours_c)
    sc, pl = scale_and_plane(plane_cvo)
    cvo_err = row("cv2.calibrateCamera on our centres", rms_cvo, sc, pl)
    if all(found):
        rms_cv, dist_cv, plane_cv = cv_calibrate(cv_c)
        sc, pl = scale_and_plane(plane_cv)
        row("cv2.findCirclesGrid + cv2.calibrateCamera", rms_cv, sc, pl)
    sc, pl = scale_and_plane(homography_plane(ours_c[0]))
    row("cv2.findHomography, first frame, no distortion", None, sc, pl)
    ok_ = np.array(o["k"])
    print(f"  distortion (OpenCV's normalisation): ours k1 {ok_[0] * a * a:.5f} "
          f"k2 {ok_[1] * a ** 4:.5f} p1 {ok_[2] * a:.6f} p2 {ok_[3] * a:.6f}; "
          f"OpenCV on our centres k1 {dist_cvo[0]:.5f} k2 {dist_cvo[1]:.5f} "
          f"p1 {dist_cvo[2]:.6f} p2 {dist_cvo[3]:.6f}")
    check(o["rms"] <= 1.5 * rms_cvo + 0.005,
          f"{name}: our RMS {o['rms']:.4f} px is not worse than OpenCV's "
          f"{rms_cvo:.4f} px on the same centres")
    if name == "clean":
        check(ours_err < 0.05, f"clean: our scale error {ours_err:.4f} % < 0.05 %")
        check(o["rms"] < 0.05, f"clean: our reprojection RMS {o['rms']:.4f} px < 0.05 px")
        check(cvo_err < 0.05,
              f"clean: OpenCV's model fitted to our centres gives the true scale "
              f"({cvo_err:.4f} % < 0.05 %): renderer and OpenCV agree on the "
              f"distortion's definition")
        check(all(found), "clean: cv2.findCirclesGrid finds the grid in every frame")

if failures:
    print(f"\n{len(failures)} check(s) failed")
    sys.exit(1)
print("\nall checks passed")
