"""Prints the bench figures as a table, with ratios side by side."""
import json
import sys

rows = [json.loads(l) for l in open(sys.argv[1])]
s0 = rows[0]["station"]
print(f"model: {s0['classes']} classes, {s0['trees']} trees, depth {s0['depth']}, "
      f"{s0['features']} features")
print("median ms (min-max) per frame")
print(f"{'frame':>9} {'thr':>3} | {'features':>18} {'classify':>18} {'regions':>14} "
      f"{'verdict':>14} {'total':>18} | {'OpenCV bank':>18} {'ratio':>6} | "
      f"{'XGBoost predict':>18} {'ratio':>6}")
for r in rows:
    s, o = r["station"], r["opencv"]
    def f(d):
        return f"{d['median']:7.1f} ({d['min']:.0f}-{d['max']:.0f})"
    print(f"{s['width']}x{s['height']:<4} {s['threads']:>3} | {f(s['features']):>18} "
          f"{f(s['classify']):>18} {f(s['regions']):>14} {f(s['verdict']):>14} "
          f"{f(s['total']):>18} | {f(o):>18} {o['median'] / s['features']['median']:5.1f}x | "
          f"{f(s['xgboost_predict']):>18} "
          f"{s['xgboost_predict']['median'] / s['classify']['median']:5.1f}x")
print("ratio = their median / ours (above 1: the station is faster).")
