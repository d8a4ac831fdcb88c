"""Prints the bench figures as tables, with the peers' figures and ratios side by side.
usage: report.py RESULTS.jsonl EXTRA.json"""
import json
import sys

rows = [json.loads(l) for l in open(sys.argv[1])]
extra = json.load(open(sys.argv[2]))
s0, p0 = rows[0]["station"], rows[0]["peer"]
print(f"demo model: {s0['classes']} classes, {s0['trees']} trees, depth {s0['depth']}, "
      f"{s0['feature_count']} features, evaluated by the {s0['walk']} walk; OpenCV bank: {rows[0]['opencv']['features']} features; "
      f"Python peer: torch CNN block 1 ({p0['features']} features) + XGBoost inplace_predict, "
      f"{p0['trees']} trees")
print(f"median ms (min-max) over {s0['repeat']} frames per stage (peers: {p0['repeat']} runs)")


def f(d):
    return f"{d['median']:7.1f} ({d['min']:.0f}-{d['max']:.0f})"


def size(s):
    return f"{s['width']:>4}x{s['height']:<4} {s['threads']:>3}"


print("\nwhole inspection ('classify' is the locating pass, then the part's pixels)")
print(f"{'frame':>9} {'thr':>3} | {'features':>17} {'classify':>17} {'regions':>13} {'verdict':>13} "
      f"{'total':>17} || {'Python peer':>20} {'ratio':>6}")
for r in rows:
    s, p = r["station"], r["peer"]
    print(f"{size(s)} | {f(s['features']):>17} {f(s['classify']):>17} {f(s['regions']):>13} "
          f"{f(s['verdict']):>13} {f(s['total']):>17} || {f(p['total']):>20} "
          f"{p['total']['median'] / s['total']['median']:5.1f}x")
    if "locating_agreement" in s:
        print(f"{'':14}   locating pass agrees with full classification on "
              f"{100 * s['locating_agreement']:.3f}% of the warm-up frame's pixels")

print("\nfilter bank over the whole frame; floor = filter passes' multiply-adds and adds per pixel "
      "at the FMA peak measured on the same threads")
print(f"{'frame':>9} {'thr':>3} | {'ours':>17} {'OpenCV (Python)':>18} {'ratio':>6} | "
      f"{'ops/px':>7} {'peak Gop/s':>10} {'floor ms':>8} {'ours/floor':>10}")
for r in rows:
    s, o = r["station"], r["opencv"]
    print(f"{size(s)} | {f(s['filter_bank']):>17} {f(o):>18} "
          f"{o['median'] / s['filter_bank']['median']:5.1f}x | {s['filter_ops_per_px']:7.0f} "
          f"{s['fma_peak'] / 1e9:10.1f} {s['filter_floor_ms']:8.2f} "
          f"{s['filter_bank']['median'] / s['filter_floor_ms']:9.1f}x")

print("\ntree evaluator on every pixel, same model, features and threads as XGBoosterPredictFromDense")
print(f"{'frame':>9} {'thr':>3} | {'ours':>17} {'XGBoost':>19} {'ratio':>6} | max |dp|  classes differing")
for r in rows:
    s = r["station"]
    print(f"{size(s)} | {f(s['forest_all_pixels']):>17} {f(s['xgboost_predict']):>19} "
          f"{s['xgboost_predict']['median'] / s['forest_all_pixels']['median']:5.1f}x | "
          f"{s['max_abs_dp']:.1e}   {s['class_mismatches']}")
print("ratio = the peer's median / ours (above 1: the station is faster).")

m = extra["memory"]
print(f"\npeak resident memory, inspection at {m['width']}x{m['height']}, {m['threads']} threads: "
      f"{m['peak_rss_mb']:.0f} MB, of which {m['frames_mb']:.0f} MB the benchmark's own frames "
      f"(total {m['total']['median']:.1f} ms)")
print(f"training the demo recipe ({s0['classes']} classes, {s0['trees']} trees, depth {s0['depth']}): "
      f"{extra['train_s']:.1f} s")
c, x, ce = extra["coarse"], extra["exact"], extra["coarse_effect"]
print(f"\ncoarse option (approximate, off by default), {c['width']}x{c['height']}, {c['threads']} threads: classify "
      f"{f(c['classify'])} ms against {f(x['classify'])} exact, total {f(c['total'])} against {f(x['total'])}; "
      f"class map equal to the exact pass on {100 * c['coarse_agreement']:.3f}% of the warm-up frame")
print(f"  demo test set, {ce['images']} images: the same verdict on {ce['same_verdict']} "
      f"(exact: {', '.join(f'{n} {v}' for v, n in ce['verdicts'].items())}); "
      f"mean IoU {ce['exact']['mean_iou']:.4f} exact, {ce['coarse']['mean_iou']:.4f} coarse")
print("  IoU per class, exact / coarse: " +
      ", ".join(f"{k} {ce['exact']['iou'][k]:.4f} / {ce['coarse']['iou'][k]:.4f}" for k in ce["exact"]["iou"]))
if extra["callgrind"]:
    for item in extra["callgrind"].strip(";").split(";"):
        ir, name = item.split(" ", 1)
        print(f"callgrind, {name.split(':')[-1].split(' ')[0]}: {int(ir) / 2 / 1e6:.1f} M instructions per "
              f"640x480 frame (1 thread, mean of 2 frames)")
