"""ONNX's own backend conformance data (Debian's libonnx-testdata, ONNX 1.12)
run through core/onnx + core/cnn by tests/tools/onnx_run, which compares with
the stored outputs as ONNX's backend runner does (numpy assert_allclose with
rtol 1e-3, atol 1e-7 unless a case's data.json says otherwise:
onnx/backend/test/loader/__init__.py).  One line per case.

Cases: every node test_conv_* and test_basic_conv_* except the integer ones
(ConvInteger), relu, maxpool 2-D float, averagepool 2-D, batchnorm, add, and
the pytorch-converted test_Conv2d*.  The two batchnorm *_training_mode cases
ask for the running statistics as outputs, which an inference stem does not
compute: they must be refused with a clear message, and that is checked."""
import glob
import os
import subprocess
import sys

from refcheck import check, status, tool

DATA = "/usr/share/libonnx-testdata/data"


def cases():
    node = os.path.join(DATA, "node")
    pats = ["test_conv_*", "test_basic_conv_*", "test_relu", "test_maxpool_2d_*", "test_averagepool_2d_*",
            "test_batchnorm_*", "test_add", "test_add_bcast"]
    found = []
    for p in pats:
        found += glob.glob(os.path.join(node, p))
    found += glob.glob(os.path.join(DATA, "pytorch-converted", "test_Conv2d*"))
    # integer operators and integer tensors are outside a float stem
    return sorted(c for c in found if "integer" not in c and not c.endswith("uint8"))


def main():
    if not os.path.isdir(DATA):
        check("libonnx-testdata installed", False, DATA + " missing (apt-get install libonnx-testdata)")
        return status()
    all_cases = cases()
    check("conformance cases found", len(all_cases) >= 45, "%d cases" % len(all_cases))
    for c in all_cases:
        name = os.path.relpath(c, DATA)
        for threads in ("1", "2"):
            r = subprocess.run([tool("onnx_run"), c, threads], capture_output=True, text=True)
            line = (r.stdout + r.stderr).strip().replace(DATA + "/", "")
            if name.endswith("_training_mode"):
                check("%s refused (%s thr): %s" % (name, threads, line), r.returncode == 3 and
                      "training" in line and "not supported" in line)
            else:
                check("%s (%s thr): %s" % (name, threads, line), r.returncode == 0 and line.startswith("ok"))
    return status()


if __name__ == "__main__":
    sys.exit(main())
