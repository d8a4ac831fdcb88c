"""Prints the bench figures as a table, with ratios side by side."""
import json
import sys

rows = [json.loads(l) for l in open(sys.argv[1])]
s0 = rows[0]["station"]
print(f"demo model: {s0['classes']} classes, {s0['trees']} trees, depth {s0['depth']}, "
      f"{s0['feature_count']} features; OpenCV bank: {rows[0]['opencv']['features']} features")
print("median ms (min-max) per frame; 'classify' is the station's stage (locating pass, then the "
      "part's pixels);\n'all px' is our evaluator on every pixel, the same work XGBoost's predictor does")


def f(d):
    return f"{d['median']:6.1f} ({d['min']:.0f}-{d['max']:.0f})"


print(f"{'frame':>9} {'thr':>3} | {'features':>16} {'classify':>16} {'regions':>12} "
      f"{'verdict':>12} {'total':>16} || {'OpenCV bank':>16} {'ratio':>6} || "
      f"{'all px (ours)':>16} {'XGBoost':>18} {'ratio':>6}")
for r in rows:
    s, o = r["station"], r["opencv"]
    print(f"{s['width']:>4}x{s['height']:<4} {s['threads']:>3} | {f(s['features']):>16} "
          f"{f(s['classify']):>16} {f(s['regions']):>12} {f(s['verdict']):>12} "
          f"{f(s['total']):>16} || {f(o):>16} {o['median'] / s['features']['median']:5.1f}x || "
          f"{f(s['forest_all_pixels']):>16} {f(s['xgboost_predict']):>18} "
          f"{s['xgboost_predict']['median'] / s['forest_all_pixels']['median']:5.1f}x")
    print(f"{'':14}   agreement with XGBoost: max |dp| {s['max_abs_dp']:.1e}; locating pass "
          f"agrees with full classification on {100 * s['locating_agreement']:.3f}% of pixels")
print("ratio = their median / ours (above 1: the station is faster).")
