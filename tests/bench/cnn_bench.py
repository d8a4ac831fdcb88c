"""VGG16 block-1 features (conv1_1, relu, conv1_2, relu: 64 channels at full
resolution) at 640x480 and 1280x960 on 1 and 2 threads: our executor
(tests/bench/cnn_bench, core/cnn) beside torch from Debian's python3-torch in
its default NCHW layout and in channels_last, on the same weights, in one
run; and our bfloat16 path (cnn_precision = bf16: AMX tiles where present,
rounded operands on the float32 kernels elsewhere).

Prints GFLOP, our median and best ms over REPS runs and their shares of the
FP32 FMA peak, the peak being measured by cnn_bench --peak on as many
threads right before and right after each of our runs (so under the same
load; the better of the two counts): "%peak" is
our best wall-clock rate over the peak's wall-clock rate; "%core" our rate
per second of CPU time our threads got over the peak kernel's (what a core
does while it runs ours, which other work on the machine does not take
from it); "%425" is against the 425 GFLOP/s for 2 cores the issue states.
Then torch's two layouts and the ratio to the better one.

The machine is shared: run it when `uptime` shows little load.  Usage:
cnn_bench.py BUILD [REPS]"""
import os
import re
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref"))
import onnx  # noqa: E402

import vggonnx  # noqa: E402

STATED_PEAK_2 = 425.0  # GFLOP/s for 2 cores, from the issue


def torch_ms(ws, w, h, threads, layout, reps):
    import torch
    import torch.nn.functional as F
    torch.set_num_threads(threads)
    x = torch.randn(1, 3, h, w)
    w1, b1 = torch.from_numpy(ws[0][0]), torch.from_numpy(ws[0][1])
    w2, b2 = torch.from_numpy(ws[1][0]), torch.from_numpy(ws[1][1])
    if layout == "channels_last":
        x = x.contiguous(memory_format=torch.channels_last)
        w1 = w1.contiguous(memory_format=torch.channels_last)
        w2 = w2.contiguous(memory_format=torch.channels_last)
    ts = []
    with torch.no_grad():
        f = lambda: F.relu(F.conv2d(F.relu(F.conv2d(x, w1, b1, padding=1)), w2, b2, padding=1))  # noqa: E731
        f()
        for _ in range(reps):
            t0 = time.perf_counter()
            f()
            ts.append((time.perf_counter() - t0) * 1e3)
    return float(np.median(ts))


def peak(exe, threads):
    out = subprocess.run([exe, "--peak", str(threads)], capture_output=True, text=True).stdout
    return (float(re.search(r"gflops=([0-9.]+)", out).group(1)),
            float(re.search(r"gflops_per_cpu_s=([0-9.]+)", out).group(1)))


def ours(exe, model, w, h, t, reps, *extra):
    out = subprocess.run([exe, model, "relu1_2", str(w), str(h), str(t), str(reps)] + list(extra),
                         capture_output=True, text=True).stdout
    m = re.search(r"gflop=([0-9.]+) ms_median=([0-9.]+) ms_min=([0-9.]+) cpu_ms_median=([0-9.]+) "
                  r"cpu_ms_min=([0-9.]+)", out)
    return [float(v) for v in m.groups()]


def main():
    build = sys.argv[1] if len(sys.argv) > 1 else "build"
    reps = int(sys.argv[2]) if len(sys.argv) > 2 else 7
    exe = os.path.join(build, "tests", "bench", "cnn_bench")
    print("cnn_bench: VGG16 block 1 (relu1_2), load: %s" % open("/proc/loadavg").read().split()[:3])
    ws = vggonnx.weights(blocks=1)
    with tempfile.TemporaryDirectory() as tmp:
        model = os.path.join(tmp, "vgg16_block1.onnx")
        onnx.save(vggonnx.model(blocks=1), model)
        print("%-9s %3s %6s %9s %8s %11s %6s %6s %6s %8s %8s %7s %8s" % (
            "size", "thr", "GFLOP", "ours ms", "best ms", "peak GF/s", "%peak", "%core", "%425", "nchw ms",
            "cl ms", "speedup", "bf16 ms"))
        for w, h in ((640, 480), (1280, 960)):
            for t in (1, 2):
                before = peak(exe, t)
                gflop, ms, best, _, cpu_best = ours(exe, model, w, h, t, reps)
                after = peak(exe, t)
                wall_peak, cpu_peak = max(before[0], after[0]), max(before[1], after[1])
                ms16 = ours(exe, model, w, h, t, reps, "bf16")[1]
                nchw = torch_ms(ws, w, h, t, "nchw", reps)
                cl = torch_ms(ws, w, h, t, "channels_last", reps)
                rate = gflop / best * 1e3
                print("%-9s %3d %6.1f %9.1f %8.1f %11.0f %5.0f%% %5.0f%% %5.0f%% %8.1f %8.1f %6.2fx %8.1f" % (
                    "%dx%d" % (w, h), t, gflop, ms, best, wall_peak, 100 * rate / wall_peak,
                    100 * gflop / cpu_best * 1e3 / cpu_peak, 100 * rate / (STATED_PEAK_2 * t / 2), nchw, cl,
                    min(nchw, cl) / ms, ms16))
    return 0


if __name__ == "__main__":
    sys.exit(main())
