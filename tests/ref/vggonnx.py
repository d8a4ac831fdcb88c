"""Writes a VGG16-architecture convolutional part as ONNX with python3-onnx
(random weights, fixed seed), the way torchvision's vgg16().features is laid
out: 13 3x3 convolutions with padding 1, each followed by ReLU, and a 2x2
max-pool of stride 2 after each of the five blocks (Simonyan & Zisserman,
configuration D).  Tensor names: conv1_1, relu1_1, ..., pool1, ..., pool5.
Shared by tests/ref/test_cnn.py, the e2e check and tests/bench/cnn_bench.py."""
import numpy as np
import onnx
from onnx import TensorProto, helper, numpy_helper

VGG16 = [64, 64, "M", 128, 128, "M", 256, 256, 256, "M", 512, 512, 512, "M", 512, 512, 512, "M"]


def weights(seed=7, blocks=5):
    """[(W, b)] per convolution, He-scaled so activations neither vanish nor explode."""
    rng = np.random.default_rng(seed)
    out, cin, block = [], 3, 1
    for v in VGG16:
        if v == "M":
            block += 1
            if block > blocks:
                break
            continue
        w = (rng.standard_normal((v, cin, 3, 3)) * np.sqrt(2.0 / (cin * 9))).astype(np.float32)
        b = (rng.standard_normal(v) * 0.05).astype(np.float32)
        out.append((w, b))
        cin = v
    return out


def model(seed=7, blocks=5, opset=13):
    """The ONNX ModelProto of the first `blocks` blocks, output pool<blocks>."""
    ws = weights(seed, blocks)
    nodes, inits = [], []
    x, k, block, conv = "image", 0, 1, 1
    for v in VGG16:
        if v == "M":
            y = "pool%d" % block
            nodes.append(helper.make_node("MaxPool", [x], [y], name=y, kernel_shape=[2, 2], strides=[2, 2]))
            x, block, conv = y, block + 1, 1
            if block > blocks:
                break
            continue
        w, b = ws[k]
        k += 1
        name = "%d_%d" % (block, conv)
        inits += [numpy_helper.from_array(w, "w" + name), numpy_helper.from_array(b, "b" + name)]
        nodes.append(helper.make_node("Conv", [x, "w" + name, "b" + name], ["conv" + name], name="conv" + name,
                                      kernel_shape=[3, 3], pads=[1, 1, 1, 1]))
        nodes.append(helper.make_node("Relu", ["conv" + name], ["relu" + name], name="relu" + name))
        x, conv = "relu" + name, conv + 1
    inp = helper.make_tensor_value_info("image", TensorProto.FLOAT, [1, 3, "H", "W"])
    out = helper.make_tensor_value_info(x, TensorProto.FLOAT, [1, VGG16[-2], "h", "w"])
    g = helper.make_graph(nodes, "vgg16_features", [inp], [out], inits)
    m = helper.make_model(g, opset_imports=[helper.make_opsetid("", opset)], producer_name="station tests")
    onnx.checker.check_model(m)
    return m


def torch_forward(x, ws, upto):
    """Reference forward pass in torch of the first convolutions; upto names the
    last tensor wanted ("relu1_2", "pool5", ...)."""
    import torch
    import torch.nn.functional as F
    t = torch.from_numpy(x)
    k, block, conv = 0, 1, 1
    for v in VGG16:
        if v == "M":
            t = F.max_pool2d(t, 2, 2)
            if upto == "pool%d" % block:
                return t.numpy()
            block, conv = block + 1, 1
            continue
        w, b = ws[k]
        k += 1
        t = F.relu(F.conv2d(t, torch.from_numpy(w), torch.from_numpy(b), padding=1))
        if upto == "relu%d_%d" % (block, conv):
            return t.numpy()
        conv += 1
    raise ValueError(upto)
