"""The CNN feature path against torch (Debian's python3-torch) on a
VGG16-architecture network written with python3-onnx (random weights, fixed
seed; tests/ref/vggonnx.py), and its refusals.

- block-1 output (relu1_2) and the whole convolutional part (pool5) of our
  executor (tests/tools/onnx_run) against torch.nn.functional's conv2d, relu
  and max_pool2d on the same input and weights; tolerance rtol 1e-3 as ONNX's
  backend tests, atol 1e-5 x the output's largest value (float32 sums in
  another order over up to 4608 terms; common practice, no source).
- a strided cut (pool1) brought back to full size, against
  torch.nn.functional.interpolate(mode='bilinear', align_corners=False).
- a file from torch.onnx.export, and a small graph with two branches (Add,
  Concat), BatchNormalization after a Conv, Clip, Identity, AveragePool and a
  strided Conv with asymmetric pads, against the same ops in torch.
- runs over a box of the frame (tests/tools/cnn_box) against the whole
  frame's run, which the checks above hold to torch: bit for bit inside,
  nothing written outside, nothing read beyond the input box named.
- parameter counts printed by `station recipe check`: VGG16's convolutional
  part has 14,714,688 and its first block 38,720 = 1,792 + 36,928 (facts of
  the trade: 3*3*3*64 + 64 and 3*3*64*64 + 64).
- weights in an external data file beside the model are read; a location
  that leaves the folder ('../x', an absolute path, a symlink) is refused;
  so are a truncated file, random bytes, and an operator we do not run."""
import os
import subprocess
import sys
import tempfile

import numpy as np
import onnx
from onnx import TensorProto, helper, numpy_helper

import vggonnx
from refcheck import BUILD, check, status, tool

STATION = os.path.join(BUILD, "station")


def write_case(folder, model, x, y, rtol=1e-3, atol=None):
    os.makedirs(os.path.join(folder, "test_data_set_0"), exist_ok=True)
    onnx.save(model, os.path.join(folder, "model.onnx"))
    for name, arr in (("input_0.pb", x), ("output_0.pb", y)):
        with open(os.path.join(folder, "test_data_set_0", name), "wb") as f:
            f.write(numpy_helper.from_array(np.ascontiguousarray(arr, dtype=np.float32)).SerializeToString())
    if atol is None:
        atol = 1e-5 * float(np.abs(y).max())
    with open(os.path.join(folder, "data.json"), "w") as f:
        f.write('{"rtol": %g, "atol": %g}' % (rtol, atol))


def run(folder, *args):
    r = subprocess.run([tool("onnx_run"), folder] + list(args), capture_output=True, text=True)
    return r.returncode, (r.stdout + r.stderr).strip()


def against_torch(tmp, model, ws):
    import torch
    import torch.nn.functional as F
    rng = np.random.default_rng(11)
    # asymmetric; 40 = 6 x 6 + 4 and 41 leave each remainder path of the kernel some pixels
    x = rng.standard_normal((1, 3, 29, 40)).astype(np.float32)
    y = vggonnx.torch_forward(x, ws, "relu1_2")
    write_case(os.path.join(tmp, "block1"), model, x, y)
    for threads in ("1", "2"):
        rc, out = run(os.path.join(tmp, "block1"), threads, "relu1_2")
        check("VGG16 block 1 (relu1_2, 40x29) vs torch, %s thread(s): %s" % (threads, out), rc == 0)
    # bfloat16 (AMX where the CPU has it): inputs and weights rounded to 8
    # significant bits, so 2% of the output's scale (a bound from bfloat16's
    # 2^-8 relative rounding summed over 576 terms, not a source)
    write_case(os.path.join(tmp, "block1bf16"), model, x, y, rtol=0.02, atol=0.02 * float(np.abs(y).max()))
    rc, out = run(os.path.join(tmp, "block1bf16"), "2", "relu1_2", "bf16")
    check("VGG16 block 1 in bfloat16 vs torch float32, within 2%%: %s" % out, rc == 0)
    x = rng.standard_normal((1, 3, 64, 96)).astype(np.float32)
    y = vggonnx.torch_forward(x, ws, "pool5")
    write_case(os.path.join(tmp, "pool5"), model, x, y)
    rc, out = run(os.path.join(tmp, "pool5"), "2", "pool5")
    check("VGG16 convolutional part (pool5, 96x64) vs torch: %s" % out, rc == 0)
    x = rng.standard_normal((1, 3, 23, 31)).astype(np.float32)
    low = torch.from_numpy(vggonnx.torch_forward(x, ws, "pool1"))
    y = F.interpolate(low, size=(23, 31), mode="bilinear", align_corners=False).numpy()
    write_case(os.path.join(tmp, "pool1full"), model, x, y)
    rc, out = run(os.path.join(tmp, "pool1full"), "2", "pool1", "full")
    check("pool1 (stride 2) back to 31x23 vs torch bilinear, align_corners=False: %s" % out, rc == 0)


def torch_export(tmp):
    """A file written by torch's own ONNX exporter (as the README tells users
    to make one), cut at the block's second ReLU by the name torch gives it."""
    import torch
    torch.manual_seed(3)
    net = torch.nn.Sequential(torch.nn.Conv2d(3, 64, 3, padding=1), torch.nn.ReLU(inplace=True),
                              torch.nn.Conv2d(64, 64, 3, padding=1), torch.nn.ReLU(inplace=True),
                              torch.nn.MaxPool2d(2, 2)).eval()
    folder = os.path.join(tmp, "torch_export")
    os.makedirs(os.path.join(folder, "test_data_set_0"))
    torch.onnx.export(net, torch.zeros(1, 3, 32, 32), os.path.join(folder, "model.onnx"), input_names=["image"],
                      dynamic_axes={"image": {2: "H", 3: "W"}}, opset_version=13)
    model = onnx.load(os.path.join(folder, "model.onnx"))
    cut = [n.output[0] for n in model.graph.node if n.op_type == "Relu"][-1]
    x = np.random.default_rng(4).standard_normal((1, 3, 27, 41)).astype(np.float32)
    with torch.no_grad():
        y = net[:4](torch.from_numpy(x)).numpy()
    write_case(folder, model, x, y)
    rc, out = run(folder, "2", cut)
    check("torch.onnx.export file cut at %s vs torch: %s" % (cut, out), rc == 0)


def branches(tmp):
    """A small graph with two branches joined by Add and Concat, a Conv with
    BatchNormalization after it (folded), Clip with opset-13 min/max inputs,
    Identity, a strided Conv and an AveragePool, against torch."""
    import torch
    import torch.nn.functional as F
    rng = np.random.default_rng(9)
    def arr(*shape, scale=0.3):
        return (rng.standard_normal(shape) * scale).astype(np.float32)
    p = {"w1": arr(8, 3, 3, 3), "b1": arr(8), "w2": arr(8, 8, 1, 1), "b2": arr(8), "w3": arr(8, 8, 3, 3),
         "b3": arr(8), "g": (1 + arr(8)).astype(np.float32), "beta": arr(8), "mean": arr(8),
         "var": (0.5 + np.abs(arr(8))).astype(np.float32), "lo": np.array(0.0, np.float32),
         "hi": np.array(0.6, np.float32)}
    N = helper.make_node
    nodes = [N("Conv", ["x", "w1", "b1"], ["c1"], name="c1", pads=[1, 1, 1, 1]),
             N("BatchNormalization", ["c1", "g", "beta", "mean", "var"], ["bn"], name="bn", epsilon=1e-3),
             N("Clip", ["bn", "lo", "hi"], ["a"], name="clip"),
             N("Identity", ["a"], ["a2"], name="id"),
             N("Conv", ["a2", "w2", "b2"], ["c2"], name="c2"),
             N("Relu", ["c2"], ["r2"], name="r2"),
             N("Conv", ["a2", "w3", "b3"], ["c3"], name="c3", pads=[1, 1, 1, 1], dilations=[1, 1]),
             N("Add", ["r2", "c3"], ["s"], name="add"),
             N("Concat", ["s", "a2"], ["cat"], name="cat", axis=1),
             N("AveragePool", ["cat"], ["pool"], name="pool", kernel_shape=[3, 3], strides=[2, 2],
               pads=[1, 1, 1, 1], count_include_pad=1),
             N("Conv", ["pool", "w4", "b4"], ["out"], name="c4", strides=[2, 1], pads=[0, 1, 1, 0])]
    p["w4"], p["b4"] = arr(4, 16, 2, 3), arr(4)
    inits = [numpy_helper.from_array(v, k) for k, v in p.items()]
    g = helper.make_graph(nodes, "branches", [helper.make_tensor_value_info("x", TensorProto.FLOAT, [1, 3, "H", "W"])],
                          [helper.make_tensor_value_info("out", TensorProto.FLOAT, None)], inits)
    model = helper.make_model(g, opset_imports=[helper.make_opsetid("", 13)])
    x = rng.standard_normal((1, 3, 19, 26)).astype(np.float32)
    t = {k: torch.from_numpy(v) for k, v in p.items()}
    with torch.no_grad():
        xt = torch.from_numpy(x)
        bn = F.batch_norm(F.conv2d(xt, t["w1"], t["b1"], padding=1), t["mean"], t["var"], t["g"], t["beta"],
                          training=False, eps=1e-3)
        a = torch.clamp(bn, 0.0, 0.6)
        s = F.relu(F.conv2d(a, t["w2"], t["b2"])) + F.conv2d(a, t["w3"], t["b3"], padding=1)
        pool = F.avg_pool2d(torch.cat([s, a], 1), 3, 2, padding=1, count_include_pad=True)
        y = F.conv2d(F.pad(pool, (1, 0, 0, 1)), t["w4"], t["b4"], stride=(2, 1)).numpy()
    folder = os.path.join(tmp, "branches")
    write_case(folder, model, x, y)
    for threads in ("1", "2"):
        rc, out = run(folder, threads)
        check("branches (BN folded, Clip, Identity, Add, Concat, AveragePool, strided Conv) vs torch, %s "
              "thread(s): %s" % (threads, out), rc == 0)


def boxes(tmp):
    """Runs over a box of the frame against the whole frame's run (whose
    values the checks above hold to torch): bit for bit inside, nothing
    written outside, nothing read outside the input box the executor names
    (tests/tools/cnn_box), for the stem, a strided cut brought back to full
    size, the whole convolutional part and the branches."""
    cases = (("block1", "relu1_2", 41, 29, ()), ("pool1full", "pool1", 31, 23, ("full",)),
             ("pool5", "pool5", 96, 64, ("full",)), ("branches", "", 150, 21, ()))
    for folder, cut, w, h, extra in cases:
        for threads in ("1", "2"):
            r = subprocess.run([tool("cnn_box"), os.path.join(tmp, folder, "model.onnx"), cut, str(w), str(h),
                                threads] + list(extra), capture_output=True, text=True)
            lines = r.stdout.splitlines()
            check("box runs of %s (%dx%d, %s thread(s)) equal the whole frame's: %d boxes" % (
                folder, w, h, threads, len(lines)), r.returncode == 0 and len(lines) == 16 and
                all(l.startswith("ok") for l in lines), r.stdout + r.stderr)


def params(tmp):
    recipe = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "recipes", "ostrel-cap38.ini")
    base = open(recipe).read()
    for cut, want in (("relu1_2", 38720), ("conv1_1", 1792), ("pool5", 14714688)):
        text = base.replace("families = colour", "cnn_model = vgg16.onnx\ncnn_output = %s\nfamilies = colour" % cut)
        path = os.path.join(tmp, "r_%s.ini" % cut)
        with open(path, "w") as f:
            f.write(text)
        r = subprocess.run([STATION, "recipe", "check", path], capture_output=True, text=True)
        line = [l for l in r.stderr.splitlines() if "parameters" in l]
        got = int(line[0].split(" parameters")[0].split()[-1]) if line else -1
        check("parameters of the cut at %s: %d (want %d)" % (cut, got, want), r.returncode == 0 and got == want,
              r.stderr.strip())
    c2 = 38720 - 1792
    check("conv1_2 alone is 3*3*64*64 + 64 = 36928", c2 == 3 * 3 * 64 * 64 + 64 == 36928)


def conv_model(weight, ext=None):
    """One 3x3 Conv 3->64; with ext, W lives in external data at ext."""
    w = numpy_helper.from_array(weight, "w")
    if ext is not None:
        w.ClearField("raw_data")
        w.data_location = TensorProto.EXTERNAL
        for k, v in (("location", ext), ("offset", "0"), ("length", str(weight.nbytes))):
            e = w.external_data.add()
            e.key, e.value = k, v
    node = helper.make_node("Conv", ["x", "w"], ["y"], name="c", pads=[1, 1, 1, 1])
    g = helper.make_graph([node], "g", [helper.make_tensor_value_info("x", TensorProto.FLOAT, [1, 3, 5, 7])],
                          [helper.make_tensor_value_info("y", TensorProto.FLOAT, [1, 64, 5, 7])], [w])
    return helper.make_model(g, opset_imports=[helper.make_opsetid("", 13)])


def external(tmp):
    import torch
    import torch.nn.functional as F
    rng = np.random.default_rng(5)
    wt = rng.standard_normal((64, 3, 3, 3)).astype(np.float32)
    x = rng.standard_normal((1, 3, 5, 7)).astype(np.float32)
    y = F.conv2d(torch.from_numpy(x), torch.from_numpy(wt), padding=1).numpy()
    good = os.path.join(tmp, "ext_ok")
    write_case(good, conv_model(wt, "weights/w.bin"), x, y)
    os.makedirs(os.path.join(good, "weights"), exist_ok=True)
    wt.tofile(os.path.join(good, "weights", "w.bin"))
    rc, out = run(good)
    check("external data beside the model is read: %s" % out, rc == 0)
    outside = os.path.join(tmp, "outside.bin")
    wt.tofile(outside)
    for label, loc in (("'../x'", "../outside.bin"), ("absolute", outside), ("symlink", "link.bin"),
                       ("symlinked folder", "linkdir/outside.bin")):
        d = os.path.join(tmp, "ext_" + label.strip("'./ ").replace(" ", "_"))
        write_case(d, conv_model(wt, loc), x, y)
        if label == "symlink":
            os.symlink(outside, os.path.join(d, "link.bin"))
        if label == "symlinked folder":
            os.symlink(tmp, os.path.join(d, "linkdir"))
        rc, out = run(d)
        check("external data %s refused: %s" % (label, out),
              rc == 3 and "model.onnx" in out and ("folder" in out or "symbolic link" in out))
    d = os.path.join(tmp, "ext_short")
    write_case(d, conv_model(wt, "w.bin"), x, y)
    wt[:2].tofile(os.path.join(d, "w.bin"))
    rc, out = run(d)
    check("external data shorter than its offset + length refused: %s" % out, rc == 3 and "past its end" in out)


def broken(tmp, model_path):
    data = open(model_path, "rb").read()
    rng = np.random.default_rng(3)
    x = rng.standard_normal((1, 3, 8, 8)).astype(np.float32)
    for label, blob in (("truncated to half", data[: len(data) // 2]),
                        ("truncated to 1000 bytes", data[:1000]),
                        ("random bytes", rng.integers(0, 256, 5000, dtype=np.uint8).tobytes())):
        d = os.path.join(tmp, "bad_" + label.replace(" ", "_"))
        write_case(d, vggonnx.model(blocks=1), x, x)
        with open(os.path.join(d, "model.onnx"), "wb") as f:
            f.write(blob)
        rc, out = run(d, "1", "relu1_2")
        check("%s model refused: %s" % (label, out), rc == 3 and "model.onnx" in out and
              ("corrupt" in out or "truncated" in out or "no graph" in out or "no node" in out))
    node = helper.make_node("Sigmoid", ["x"], ["y"], name="squash")
    g = helper.make_graph([node], "g", [helper.make_tensor_value_info("x", TensorProto.FLOAT, [1, 3, 8, 8])],
                          [helper.make_tensor_value_info("y", TensorProto.FLOAT, [1, 3, 8, 8])])
    d = os.path.join(tmp, "bad_op")
    write_case(d, helper.make_model(g, opset_imports=[helper.make_opsetid("", 13)]), x, x)
    rc, out = run(d)
    check("unsupported operator refused: %s" % out, rc == 3 and "node squash: operator Sigmoid is not supported" in out)


def main():
    with tempfile.TemporaryDirectory() as tmp:
        model = vggonnx.model()
        path = os.path.join(tmp, "vgg16.onnx")
        onnx.save(model, path)
        against_torch(tmp, model, vggonnx.weights())
        torch_export(tmp)
        branches(tmp)
        boxes(tmp)
        params(tmp)
        external(tmp)
        broken(tmp, path)
    return status()


if __name__ == "__main__":
    sys.exit(main())
