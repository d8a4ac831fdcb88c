"""Calibration of the pixel scale against outside references.

- OpenCV's sample photographs left01..left14 (Debian's opencv-doc, a 9x6
  board no one here made): every view found; our corners against
  cv2.findChessboardCorners + cv2.cornerSubPix on the same images, with the
  same 11x11 refinement window (winSize 5) and, printed for comparison,
  OpenCV's usual 23x23 (winSize 11); the camera matrix from all views against
  cv2.calibrateCamera with the same lens model (CALIB_ZERO_TANGENT_DIST |
  CALIB_FIX_K3) and against OpenCV's own test suite, which expects RMS about
  0.196 px and fx about fy about 532.8 on these images (from memory); the
  corners corrected through our lens against cv2.undistortPoints.
- scikit-image's chessboard_GRAY.png (25 px squares): declared 5 mm squares
  must give 0.2 mm per pixel.
- Boards rendered here with numpy/scipy at a known homography (scale, tilt),
  blur, noise and vignetting: scale within 0.2 % of the truth, tilt within
  2 degrees, and our homography against cv2.findHomography on the same
  points.
- Region areas through a homography against the exact area of each mapped
  pixel square (a homography maps a square to a quadrilateral; shoelace
  formula in numpy); through a lens correction and a homography against
  pixel squares cut in 4x4 whose corners go through cv2.undistortPointsIter and
  cv2.perspectiveTransform; left01's homography with the lens against
  cv2.findHomography on cv2.undistortPoints of its corners.
- Refusals with their reason: no board, board partly out of view, corners at
  the frame edge, error over the limit.
"""
import glob
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time

import cv2
import numpy as np
from PIL import Image
from scipy import ndimage

sys.path.insert(0, os.path.dirname(__file__))
from refcheck import BUILD, check, status, tool  # noqa: E402

STATION = os.path.join(BUILD, "station")
PHOTOS = "/usr/share/doc/opencv-doc/examples/data"
SKIMAGE = "/usr/lib/python3/dist-packages/skimage/data/chessboard_GRAY.png"
TMP = tempfile.mkdtemp(prefix="test_calib_")


def calibrate(images, board, square, *extra):
    out = os.path.join(TMP, "cal.json")
    r = subprocess.run([STATION, "calibrate", "scale", "--board", board, "--square", str(square),
                        "--out", out, *extra, *images], capture_output=True, text=True)
    js = json.loads(r.stdout) if r.returncode == 0 else None
    return r, js, (json.load(open(out)) if r.returncode == 0 else None)


def corners(png, cols, rows):
    r = subprocess.run([tool("cornerdump"), png, str(cols), str(rows)], capture_output=True,
                       text=True)
    if r.returncode:
        return None
    return np.array([[float(v) for v in line.split()] for line in r.stdout.splitlines()])


def photographs():
    pngs, ocv5, ocv11 = [], [], []
    crit = (cv2.TERM_CRITERIA_EPS + cv2.TERM_CRITERIA_MAX_ITER, 30, 0.001)
    for f in sorted(glob.glob(os.path.join(PHOTOS, "left[0-9][0-9].jpg"))):
        png = os.path.join(TMP, os.path.basename(f)[:-4] + ".png")
        Image.open(f).convert("RGB").save(png)
        g = cv2.imread(f, cv2.IMREAD_GRAYSCALE)
        ok, c = cv2.findChessboardCorners(g, (9, 6))
        assert ok, f
        pngs.append(png)
        ocv5.append(cv2.cornerSubPix(g, c.copy(), (5, 5), (-1, -1), crit).reshape(-1, 2))
        ocv11.append(cv2.cornerSubPix(g, c.copy(), (11, 11), (-1, -1), crit).reshape(-1, 2))
    return pngs, ocv5, ocv11, g.shape[::-1]


def check_photographs():
    pngs, ocv5, ocv11, size = photographs()
    check("opencv-doc has the 13 photographs left01..left14", len(pngs) == 13, len(pngs))
    d5, d11, found = [], [], 0
    for png, a, b in zip(pngs, ocv5, ocv11):
        ours = corners(png, 9, 6)
        if ours is None:
            continue
        found += 1
        # OpenCV orders its corners its own way: compare each with our nearest
        d5.append(np.sqrt(((a[:, None] - ours[None]) ** 2).sum(-1)).min(1))
        d11.append(np.sqrt(((b[:, None] - ours[None]) ** 2).sum(-1)).min(1))
    check("every photograph's 9x6 board found", found == len(pngs), f"{found} of {len(pngs)}")
    if not d5:
        return
    d5, d11 = np.concatenate(d5), np.concatenate(d11)
    print(f"corner distance to OpenCV, same 11x11 window: median {np.median(d5):.3f} px, "
          f"95% {np.percentile(d5, 95):.3f}, max {d5.max():.3f}; OpenCV's 23x23 window: median "
          f"{np.median(d11):.3f}, 95% {np.percentile(d11, 95):.3f}, max {d11.max():.3f}")
    check("corners within 0.25 px of OpenCV's (same window), median within 0.05 px",
          d5.max() < 0.25 and np.median(d5) < 0.05, f"max {d5.max():.3f} median {np.median(d5):.3f}")
    check("corners within 0.5 px of OpenCV's 23x23 window for 95% of them",
          np.percentile(d11, 95) < 0.5, np.percentile(d11, 95))

    t0 = time.time()
    r, js, _ = calibrate(pngs, "9x6", 25, "--max-error", "3")
    wall = time.time() - t0
    check("station calibrate scale on the 13 photographs", r.returncode == 0, r.stderr.strip())
    if not js:
        return
    lens = js["lens"]
    obj = np.zeros((54, 3), np.float32)
    obj[:, :2] = np.mgrid[0:9, 0:6].T.reshape(-1, 2) * 25
    flags = cv2.CALIB_ZERO_TANGENT_DIST | cv2.CALIB_FIX_K3
    rms, K, dist, _, _ = cv2.calibrateCamera([obj] * len(ocv5), [c.reshape(-1, 1, 2) for c in ocv5],
                                             size, None, None, flags=flags)
    print(f"lens: ours fx {lens['fx']:.2f} fy {lens['fy']:.2f} cx {lens['cx']:.2f} "
          f"cy {lens['cy']:.2f} k1 {lens['k1']:.4f} k2 {lens['k2']:.4f} RMS {lens['rms_px']:.3f}; "
          f"OpenCV fx {K[0, 0]:.2f} fy {K[1, 1]:.2f} cx {K[0, 2]:.2f} cy {K[1, 2]:.2f} "
          f"k1 {dist.ravel()[0]:.4f} k2 {dist.ravel()[1]:.4f} RMS {rms:.3f}; "
          f"calibration {js['time_ms']:.0f} ms in the command, {wall:.2f} s wall")
    check("fx, fy within 0.3% of cv2.calibrateCamera (same model)",
          abs(lens["fx"] / K[0, 0] - 1) < 0.003 and abs(lens["fy"] / K[1, 1] - 1) < 0.003)
    check("cx, cy within 2 px of cv2.calibrateCamera",
          abs(lens["cx"] - K[0, 2]) < 2 and abs(lens["cy"] - K[1, 2]) < 2)
    check("fx, fy within 1% of 532.8 (OpenCV's test suite, from memory)",
          abs(lens["fx"] / 532.8 - 1) < 0.01 and abs(lens["fy"] / 532.8 - 1) < 0.01)
    check("lens RMS within 0.03 px of OpenCV's and of 0.196 px (from memory)",
          abs(lens["rms_px"] - rms) < 0.03 and abs(lens["rms_px"] - 0.196) < 0.03,
          f"{lens['rms_px']:.3f} vs {rms:.3f}")
    check("k1 negative (barrel) like OpenCV's", lens["k1"] < 0 and dist.ravel()[0] < 0)

    # corners corrected through our lens against OpenCV's correction with our lens
    pts = np.concatenate(ocv5)
    r = subprocess.run([tool("undistort")] + [repr(lens[k]) for k in ("fx", "fy", "cx", "cy",
                                                                      "k1", "k2")],
                       input="\n".join(f"{u} {v}" for u, v in pts), capture_output=True, text=True)
    ours = np.array([[float(v) for v in line.split()] for line in r.stdout.splitlines()])
    Kl = np.array([[lens["fx"], 0, lens["cx"]], [0, lens["fy"], lens["cy"]], [0, 0, 1]])
    ref = cv2.undistortPoints(pts.reshape(-1, 1, 2).astype(np.float64), Kl,
                              np.array([lens["k1"], lens["k2"], 0, 0, 0]), P=Kl).reshape(-1, 2)
    dd = np.hypot(*(ours - ref).T) if ours.shape == ref.shape else np.array([np.inf])
    print(f"undistorted corners: worst {dd.max():.2e} px from cv2.undistortPoints")
    check("lensmodel_correct within 0.01 px of cv2.undistortPoints on every corner",
          dd.max() < 0.01, f"{dd.max():.2e} px")
    # and bent again by the model (OpenCV's projectPoints), they are the corners found
    xn = np.column_stack([(ours[:, 0] - lens["cx"]) / lens["fx"],
                          (ours[:, 1] - lens["cy"]) / lens["fy"], np.ones(len(ours))])
    back, _ = cv2.projectPoints(xn, np.zeros(3), np.zeros(3), Kl,
                                np.array([lens["k1"], lens["k2"], 0, 0, 0]))
    db = np.hypot(*(back.reshape(-1, 2) - pts).T)
    check("corrected corners bent again by cv2.projectPoints come back within 1e-6 px",
          db.max() < 1e-6, f"{db.max():.2e} px")
    r, one, _ = calibrate(pngs[:1], "9x6", 25, "--max-error", "3")
    seen_worst = one["worst_px"] if one else float("inf")
    r, _, _ = calibrate(pngs[:1], "9x6", 25, "--max-error", "1")
    check("left01's worst homography error (lens bending) over 1 px is refused",
          r.returncode == 3 and "exceeds the limit 1.000 px" in r.stderr, r.stderr.strip())
    # With the lens, the scale is fitted to left01's corners corrected by it: the homography
    # is then cv2.findHomography on cv2.undistortPoints of the same corners, and what is left
    # of the error is the lens model's residual, not the bending.
    _, _, cal = calibrate(pngs, "9x6", 25, "--max-error", "3")
    ours = corners(pngs[0], 9, 6)
    fixed = cv2.undistortPoints(ours.reshape(-1, 1, 2), Kl, np.array([lens["k1"], lens["k2"], 0, 0, 0]),
                                P=Kl).reshape(-1, 2)
    obj2 = np.array([[(k % 9) * 25.0, (k // 9) * 25.0] for k in range(54)])
    Hcv, _ = cv2.findHomography(obj2, fixed, 0)
    G = np.array(cal["image_to_plane"]).reshape(3, 3)
    p = np.column_stack([fixed, np.ones(len(fixed))])
    a, b = (G @ p.T).T, (np.linalg.inv(Hcv) @ p.T).T
    dmm = np.hypot(a[:, 0] / a[:, 2] - b[:, 0] / b[:, 2], a[:, 1] / a[:, 2] - b[:, 1] / b[:, 2])
    print(f"left01 worst reprojection error: {seen_worst:.3f} px as seen, "
          f"{cal['reprojection']['worst_px']:.3f} px after the lens correction")
    check("with the lens, the homography is cv2.findHomography on cv2.undistortPoints of the "
          "corners (within 1 um)", cal["lens"]["corrected_pixels"] is True and dmm.max() < 1e-3,
          f"{dmm.max():.2e} mm")
    check("the lens correction leaves under a third of left01's worst error as seen",
          cal["reprojection"]["worst_px"] < seen_worst / 3,
          f"{cal['reprojection']['worst_px']:.3f} vs {seen_worst:.3f} px")


def check_skimage():
    png = os.path.join(TMP, "sk.png")
    Image.open(SKIMAGE).save(png)
    r, js, _ = calibrate([png], "7x7", 5)
    check("scikit-image chessboard_GRAY: 5 mm squares give 0.2 mm/px",
          js is not None and abs(js["mm_per_px_x"] - 0.2) < 2e-4 and
          abs(js["mm_per_px_y"] - 0.2) < 2e-4, r.stderr.strip())


def render(h_plane_to_img, cols, rows, square, size=(640, 480), blur=0.0, noise=0.0,
           vignette=0.0, seed=1, ss=4):
    """A board of (cols + 1) x (rows + 1) squares on a white margin, seen
    through the homography; pixel centres at integers, ss x ss samples each."""
    w, h = size
    hinv = np.linalg.inv(h_plane_to_img)
    off = (np.arange(ss) + 0.5) / ss - 0.5
    acc = np.zeros((h, w))
    ys, xs = np.mgrid[0:h, 0:w].astype(float)
    for oy in off:
        for ox in off:
            p = hinv @ np.stack([xs.ravel() + ox, ys.ravel() + oy, np.ones(xs.size)])
            X, Y = p[0] / p[2], p[1] / p[2]
            i, j = np.floor(X / square).astype(int), np.floor(Y / square).astype(int)
            inside = (i >= -1) & (i <= cols - 1) & (j >= -1) & (j <= rows - 1)
            dark = inside & ((i + j) % 2 == 0)
            acc += np.where(dark, 30.0, 220.0).reshape(h, w)
    img = acc / (ss * ss)
    if blur:
        img = ndimage.gaussian_filter(img, blur)
    if vignette:
        r2 = ((xs - w / 2) ** 2 + (ys - h / 2) ** 2) / ((w / 2) ** 2 + (h / 2) ** 2)
        img *= 1 - vignette * r2
    if noise:
        img += np.random.default_rng(seed).normal(0, noise, img.shape)
    return np.clip(np.rint(img), 0, 255).astype(np.uint8)


def camera_homography(f, cx, cy, tilt_deg, axis_deg, distance, board_centre, spin_deg=0.0):
    """Plane (mm) -> image for a camera at distance mm looking at the board's
    centre, the plane tilted by tilt_deg about an in-plane axis at axis_deg."""
    a, t = np.radians(axis_deg), np.radians(tilt_deg)
    k = np.array([np.cos(a), np.sin(a), 0.0])
    kx = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    rot = np.eye(3) + np.sin(t) * kx + (1 - np.cos(t)) * kx @ kx
    s = np.radians(spin_deg)
    spin = np.array([[np.cos(s), -np.sin(s), 0], [np.sin(s), np.cos(s), 0], [0, 0, 1]])
    rot = rot @ spin
    K = np.array([[f, 0, cx], [0, f, cy], [0, 0, 1.0]])
    c = np.array([board_centre[0], board_centre[1], 0.0])
    tvec = np.array([0, 0, distance]) - rot @ c
    H = K @ np.column_stack([rot[:, 0], rot[:, 1], tvec])
    return H / H[2, 2]


def truth_scale(H, cols, rows, square):
    hinv = np.linalg.inv(H)
    c = H @ np.array([(cols - 1) * square / 2, (rows - 1) * square / 2, 1])
    u, v = c[0] / c[2], c[1] / c[2]
    w = hinv[2] @ [u, v, 1]
    X, Y = (hinv[0] @ [u, v, 1]) / w, (hinv[1] @ [u, v, 1]) / w
    J = np.array([[hinv[0, 0] - X * hinv[2, 0], hinv[0, 1] - X * hinv[2, 1]],
                  [hinv[1, 0] - Y * hinv[2, 0], hinv[1, 1] - Y * hinv[2, 1]]]) / w
    return np.hypot(J[0, 0], J[1, 0]), np.hypot(J[0, 1], J[1, 1])


def check_rendered():
    cols, rows, sq = 9, 6, 4.0
    centre = ((cols - 1) * sq / 2, (rows - 1) * sq / 2)
    cases = [
        ("head-on, sharp", dict(tilt_deg=0, axis_deg=0), dict()),
        ("tilted 20 deg about x, blur 1 px", dict(tilt_deg=20, axis_deg=0), dict(blur=1.0)),
        ("tilted 25 deg about an oblique axis, turned 10 deg, blur 1.5 px, noise 4, vignetting "
         "30%", dict(tilt_deg=25, axis_deg=35, spin_deg=10),
         dict(blur=1.5, noise=4.0, vignette=0.3)),
    ]
    worst = 0.0
    for name, geo, look in cases:
        H = camera_homography(1400, 319.5, 239.5, distance=160, board_centre=centre, **geo)
        png = os.path.join(TMP, "render.png")
        Image.fromarray(render(H, cols, rows, sq, **look)).save(png)
        r, js, cal = calibrate([png], f"{cols}x{rows}", sq)
        check(f"rendered board found ({name})", js is not None, r.stderr.strip())
        if not js:
            continue
        tx, ty = truth_scale(H, cols, rows, sq)
        ex, ey = js["mm_per_px_x"] / tx - 1, js["mm_per_px_y"] / ty - 1
        worst = max(worst, abs(ex), abs(ey))
        print(f"{name}: scale {js['mm_per_px_x']:.6f} x {js['mm_per_px_y']:.6f} mm/px, truth "
              f"{tx:.6f} x {ty:.6f} (error {100 * ex:+.3f}%, {100 * ey:+.3f}%), tilt "
              f"{js['tilt_deg']:.2f} deg (truth {geo['tilt_deg']}), RMS {js['rms_px']:.3f} px")
        check(f"scale within 0.2% of the truth ({name})", abs(ex) < 0.002 and abs(ey) < 0.002)
        check(f"tilt within 2 deg of the truth ({name})", abs(js["tilt_deg"] - geo["tilt_deg"]) < 2,
              js["tilt_deg"])
        ours = corners(png, cols, rows)
        obj = np.array([[(k % cols) * sq, (k // cols) * sq] for k in range(cols * rows)])
        Hcv, _ = cv2.findHomography(obj, ours, 0)
        G = np.array(cal["image_to_plane"]).reshape(3, 3)
        p = np.column_stack([ours, np.ones(len(ours))])
        a = (G @ p.T).T
        b = (np.linalg.inv(Hcv) @ p.T).T
        dmm = np.hypot(a[:, 0] / a[:, 2] - b[:, 0] / b[:, 2], a[:, 1] / a[:, 2] - b[:, 1] / b[:, 2])
        check(f"homography within 1 um of cv2.findHomography on the same points ({name})",
              dmm.max() < 1e-3, f"{dmm.max():.2e} mm")
    print(f"worst scale error on the rendered boards: {100 * worst:.3f}%")


def check_area():
    w, h = 97, 61
    yy, xx = np.mgrid[0:h, 0:w]
    m = np.zeros((h, w), np.uint8)
    m[((xx - 30) / 18.0) ** 2 + ((yy - 25) / 11.0) ** 2 <= 1] = 2
    m[40:55, 60:90] = 2
    raw = os.path.join(TMP, "cm.raw")
    m.tofile(raw)
    G = np.array([[0.1, 0.012, -1.0], [-0.008, 0.11, 0.5], [4e-4, -7e-4, 1.0]])
    hs = "H=" + ",".join(repr(v) for v in G.ravel())
    r = subprocess.run([tool("regionsdump"), str(w), str(h), "3", "2", "8", "0.1", "0.1", "0",
                        raw, hs], capture_output=True, text=True)
    rows = [line.split() for line in r.stdout.splitlines()]
    check("regionsdump with a homography", r.returncode == 0 and len(rows) == 2, r.stderr)
    if len(rows) != 2:
        return
    lab, _ = ndimage.label(m == 2, structure=np.ones((3, 3)))
    for row in rows:
        k = lab[int(row[5]), int(row[4]):int(row[6]) + 1].max()
        ys, xs = np.nonzero(lab == k)
        quads = np.stack([np.stack([xs + dx, ys + dy, np.ones(xs.size)])
                          for dx, dy in ((-.5, -.5), (.5, -.5), (.5, .5), (-.5, .5))])
        q = np.einsum("ij,kjn->kin", G, quads)
        X, Y = q[:, 0] / q[:, 2], q[:, 1] / q[:, 2]
        area = 0.5 * np.abs(sum(X[i] * Y[(i + 1) % 4] - X[(i + 1) % 4] * Y[i]
                                for i in range(4))).sum()
        ours = float(row[10])
        check(f"region of {xs.size} px: area through the homography {ours:.5f} mm2 within 1e-4 "
              f"of the mapped pixel squares' {area:.5f}", abs(ours / area - 1) < 1e-4)
    r = subprocess.run([tool("regionsdump"), str(w), str(h), "3", "2", "8", "0.1", "0.2", "0",
                        raw, "H=0.1,0,0,0,0.2,0,0,0,1"], capture_output=True, text=True)
    plain = subprocess.run([tool("regionsdump"), str(w), str(h), "3", "2", "8", "0.1", "0.2", "0",
                            raw], capture_output=True, text=True)
    a = [[float(v) for v in line.split()] for line in r.stdout.splitlines()]
    b = [[float(v) for v in line.split()] for line in plain.stdout.splitlines()]
    check("an affine map gives pixels x mm_per_px_x x mm_per_px_y, Feret as without it",
          len(a) == 2 and all(abs(x[10] - y[3] * 0.02) < 1e-9 and abs(x[11] - y[11]) < 1e-9
                              for x, y in zip(a, b)))


def check_area_lens():
    """Areas through a lens correction and a homography against the mapped pixel squares: each
    pixel cut into 4x4 squares whose corners go through cv2.undistortPointsIter (P = K) and the
    homography (cv2.perspectiveTransform), shoelace formula.  Lens like OpenCV's left01..14."""
    w, h = 640, 480
    fx, fy, cx, cy, k1, k2 = 533.0, 533.5, 341.0, 235.0, -0.28, 0.09
    yy, xx = np.mgrid[0:h, 0:w]
    m = np.zeros((h, w), np.uint8)
    m[((xx - 60) / 25.0) ** 2 + ((yy - 50) / 14.0) ** 2 <= 1] = 2   # near a corner: bent most
    m[230:246, 330:350] = 2                                         # near the centre: hardly
    raw = os.path.join(TMP, "cml.raw")
    m.tofile(raw)
    G = np.array([[0.1, 0.004, -30.0], [-0.003, 0.1, -20.0], [2e-5, -3e-5, 1.0]])
    hs = "H=" + ",".join(repr(v) for v in G.ravel())
    ls = "L=" + ",".join(repr(v) for v in (fx, fy, cx, cy, k1, k2))
    args = [tool("regionsdump"), str(w), str(h), "3", "2", "8", "0.1", "0.1", "0", raw, hs]
    r = subprocess.run(args + [ls], capture_output=True, text=True)
    plain = subprocess.run(args, capture_output=True, text=True)
    rows = [line.split() for line in r.stdout.splitlines()]
    rows0 = [line.split() for line in plain.stdout.splitlines()]
    check("regionsdump with a lens and a homography", r.returncode == 0 and len(rows) == 2, r.stderr)
    if len(rows) != 2 or len(rows0) != 2:
        return
    K = np.array([[fx, 0, cx], [0, fy, cy], [0, 0, 1.0]])
    dist = np.array([k1, k2, 0, 0, 0])
    lab, _ = ndimage.label(m == 2, structure=np.ones((3, 3)))
    sub = (np.arange(5) / 4) - 0.5
    for row, row0 in zip(rows, rows0):
        k = lab[int(row[5]), int(row[4]):int(row[6]) + 1].max()
        ys, xs = np.nonzero(lab == k)
        area = 0.0
        for i in range(4):
            for j in range(4):
                quad = [(sub[i], sub[j]), (sub[i + 1], sub[j]), (sub[i + 1], sub[j + 1]),
                        (sub[i], sub[j + 1])]
                pts = np.stack([np.column_stack([xs + dx, ys + dy]) for dx, dy in quad])
                # OpenCV's plain undistortPoints stops after 5 iterations, 0.04 px short at
                # this corner; iterated to convergence it is the model's exact inverse
                und = cv2.undistortPointsIter(pts.reshape(-1, 1, 2).astype(np.float64), K, dist,
                                              None, K, (cv2.TERM_CRITERIA_COUNT |
                                                        cv2.TERM_CRITERIA_EPS, 100, 1e-12))
                q = cv2.perspectiveTransform(und, G).reshape(4, -1, 2)
                X, Y = q[..., 0], q[..., 1]
                area += 0.5 * np.abs(sum(X[c] * Y[(c + 1) % 4] - X[(c + 1) % 4] * Y[c]
                                         for c in range(4))).sum()
        ours, without = float(row[10]), float(row0[10])
        check(f"region of {xs.size} px at ({row[8]}, {row[9]}): area through the lens and the "
              f"homography {ours:.4f} mm2 within 1e-4 of the mapped squares' {area:.4f} "
              f"(without the lens {without:.4f})", abs(ours / area - 1) < 1e-4)
    corner = rows[0] if float(rows[0][9]) < 100 else rows[1]
    corner0 = rows0[0] if float(rows0[0][9]) < 100 else rows0[1]
    check("near the frame's corner the lens changes the area by more than 5% (so the check above "
          "can fail)", abs(float(corner[10]) / float(corner0[10]) - 1) > 0.05,
          f"{corner[10]} vs {corner0[10]}")


def check_refusals():
    cols, rows, sq = 9, 6, 4.0
    blank = os.path.join(TMP, "blank.png")
    Image.fromarray(np.full((120, 160), 128, np.uint8)).save(blank)
    r, _, _ = calibrate([blank], "9x6", 4)
    check("a frame without a board is refused", r.returncode == 3 and "no checkerboard" in r.stderr,
          r.stderr.strip())
    centre = ((cols - 1) * sq / 2, (rows - 1) * sq / 2)
    H = camera_homography(1400, 319.5, 239.5, 0, 0, 160, centre)
    shift = np.array([[1, 0, 250], [0, 1, 0], [0, 0, 1.0]])  # the right third out of view
    png = os.path.join(TMP, "cut.png")
    Image.fromarray(render(shift @ H, cols, rows, sq)).save(png)
    r, _, _ = calibrate([png], "9x6", 4)
    check("a board partly out of view is refused", r.returncode == 3 and
          "not found whole" in r.stderr, r.stderr.strip())
    # the top row of corners 8.5 px below the frame's top: found, but too near
    top = min((H @ [0, 0, 1])[1] / (H @ [0, 0, 1])[2], (H @ [0, (rows - 1) * sq, 1])[1] /
              (H @ [0, (rows - 1) * sq, 1])[2])
    edge = np.array([[1, 0, 0], [0, 1, 8.5 - top], [0, 0, 1.0]])
    png = os.path.join(TMP, "edge.png")
    Image.fromarray(render(edge @ H, cols, rows, sq)).save(png)
    r, _, _ = calibrate([png], "9x6", 4)
    check("corners 8.5 px from the frame edge are refused", r.returncode == 3 and
          "px from the frame edge (at least 10 needed)" in r.stderr, r.stderr.strip())
    r, _, _ = calibrate([blank], "9x6", 0)
    check("a zero square size is a usage error", r.returncode == 4)
    r = subprocess.run([STATION, "calibrate", "--help"], capture_output=True, text=True)
    check("station calibrate --help lists scale", r.returncode == 0 and "scale" in r.stdout)


check_skimage()
check_rendered()
check_area()
check_area_lens()
check_refusals()
check_photographs()
shutil.rmtree(TMP)
sys.exit(status())
