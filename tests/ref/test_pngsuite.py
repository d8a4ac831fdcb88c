#!/usr/bin/python3
"""core/pngio against PIL on the PngSuite images and on label masks PIL writes.

Reference: PIL (python3-pil) with numpy.  pngio_load_rgb is defined by
libpng's transforms (expand, strip_16 = high byte, gray_to_rgb, strip_alpha:
alpha and tRNS dropped, no gamma/sBIT/bKGD applied).  PIL's convert('RGB')
agrees with that for every mode except 16-bit grey, which PIL keeps as
integers and clips at 255; there the reference is PIL's raw 16-bit array
shifted right by 8.  PIL's 1/2/4-bit grey already equals libpng's expansion
v*255/(2^depth-1).  pngio_load_label is defined as raw samples: palette
indices (PIL's 'P' array) or unscaled grey (PIL's array divided back by
255/(2^depth-1)).  Every comparison is exact (tolerance 0).
PngSuite comes from Debian's libsixel-examples.
"""
import glob
import gzip
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import warnings

import numpy as np
from PIL import Image

SUITE = "/usr/share/doc/libsixel-examples/examples/images/pngsuite"
import refcheck
TOOL = refcheck.tool("pngdump")

# PIL suggests RGBA for palette+tRNS files; dropping tRNS is exactly what is tested.
warnings.filterwarnings("ignore", "Palette images with Transparency", UserWarning)


def check(ok, what):
    refcheck.check(what, ok)


def run(*args):
    p = subprocess.run([TOOL, *args], capture_output=True)
    return p.returncode, p.stdout, p.stderr.decode(errors="replace").strip()


def decode(out):
    """Splits pngdump's "W H C\\n" header from the pixel bytes."""
    head, _, data = out.partition(b"\n")
    w, h, c = map(int, head.split())
    a = np.frombuffer(data, np.uint8)
    if a.size != w * h * c:
        return None
    return a.reshape(h, w, c) if c == 3 else a.reshape(h, w)


def ihdr(path):
    """(bit depth, colour type) straight from the file's IHDR."""
    with open(path, "rb") as f:
        head = f.read(26)
    return head[24], head[25]


def ref_rgb(path):
    im = Image.open(path)
    if im.mode in ("I", "I;16", "I;16B"):
        # PIL clips 16-bit grey at 255; libpng's strip_16 keeps the high byte.
        a = (np.asarray(im).astype(np.uint32) >> 8).astype(np.uint8)
        return np.repeat(a[:, :, None], 3, axis=2)
    return np.asarray(im.convert("RGB"))


def ref_label(path, depth):
    im = Image.open(path)
    a = np.asarray(im).astype(np.int32)
    if im.mode == "L" and depth < 8:
        a = a // (255 // (2**depth - 1))
    return a.astype(np.uint8)


def suite_files(tmp):
    """PngSuite paths; .png.gz files are decompressed into tmp."""
    files = []
    for p in sorted(glob.glob(os.path.join(SUITE, "**", "*.png*"), recursive=True)):
        if p.endswith(".png.gz"):
            dst = os.path.join(tmp, os.path.basename(p)[:-3])
            with gzip.open(p, "rb") as src, open(dst, "wb") as out:
                shutil.copyfileobj(src, out)
            files.append(dst)
        elif p.endswith(".png"):
            files.append(p)
    return files


def check_suite(tmp):
    files = suite_files(tmp)
    check(len(files) >= 150, f"PngSuite found: {len(files)} files under {SUITE}")
    n_rgb = n_label = n_refused = n_bad = 0
    for p in files:
        name = os.path.basename(p)
        if name.startswith("x"):
            rc, out, msg = run("rgb", p)
            ok = rc == 3 and msg.startswith(p + ": ") and out == b""
            check(ok, f"corrupt {name} refused: rc={rc} '{msg}'")
            n_bad += ok
            continue
        rc, out, msg = run("rgb", p)
        got = decode(out) if rc == 0 else None
        want = ref_rgb(p)
        ok = got is not None and got.shape == want.shape and np.array_equal(got, want)
        diff = ""
        if got is not None and got.shape == want.shape and not ok:
            diff = f", {int(np.count_nonzero(got != want))} bytes differ"
        check(ok, f"rgb {name} == PIL ({want.shape[1]}x{want.shape[0]}){diff} {msg}")
        n_rgb += ok
        depth, ctype = ihdr(p)
        rc, out, msg = run("label", p)
        if ctype == 3 or (ctype == 0 and depth <= 8):
            got = decode(out) if rc == 0 else None
            want = ref_label(p, depth)
            ok = got is not None and got.shape == want.shape and np.array_equal(got, want)
            check(ok, f"label {name} == PIL raw samples ({depth}-bit type {ctype}) {msg}")
            n_label += ok
        else:
            ok = rc == 3 and msg.startswith(p + ": label mask must be")
            check(ok, f"label {name} refused ({depth}-bit type {ctype}): '{msg}'")
            n_refused += ok
    print(f"PngSuite: {n_rgb} rgb decodes match, {n_label} label decodes match, "
          f"{n_refused} label refusals, {n_bad} corrupt files refused")


def check_labels(tmp):
    rng = np.random.default_rng(7)
    w, h = 13, 7
    # palette mask: indices 0..5 and 255, with a palette that is not grey.
    idx = rng.integers(0, 6, size=(h, w)).astype(np.uint8)
    idx[2, 11] = 255
    im = Image.fromarray(idx, "P")
    im.putpalette([(i * 37) % 256 for i in range(768)])
    pal = os.path.join(tmp, "mask_p.png")
    im.save(pal)
    rc, out, msg = run("label", pal, "6")
    got = decode(out) if rc == 0 else None
    check(got is not None and np.array_equal(got, np.asarray(Image.open(pal))),
          f"label palette mask (PIL 'P' writer) indices exact {msg}")
    # 2-bit palette file, PIL writes it when asked for bits=2.
    small = (idx % 4).astype(np.uint8)
    im2 = Image.fromarray(small, "P")
    im2.putpalette([0, 0, 0, 255, 0, 0, 0, 255, 0, 0, 0, 255])
    pal2 = os.path.join(tmp, "mask_p2.png")
    im2.save(pal2, bits=2)
    depth, ctype = ihdr(pal2)
    rc, out, msg = run("label", pal2, "4")
    got = decode(out) if rc == 0 else None
    check(depth == 2 and ctype == 3 and got is not None and np.array_equal(got, small),
          f"label {depth}-bit palette mask indices exact {msg}")
    # grey mask with a known out-of-range value.
    grey = rng.integers(0, 4, size=(h, w)).astype(np.uint8)
    grey[0, 0] = 255
    gpath = os.path.join(tmp, "mask_l.png")
    Image.fromarray(grey, "L").save(gpath)
    rc, out, msg = run("label", gpath, "4")
    got = decode(out) if rc == 0 else None
    check(got is not None and np.array_equal(got, grey), f"label grey mask values exact {msg}")
    bad = grey.copy()
    bad[5, 9] = 7
    bpath = os.path.join(tmp, "mask_bad.png")
    Image.fromarray(bad, "L").save(bpath)
    rc, out, msg = run("label", bpath, "4")
    want = f"{bpath}: label value 7 at (9,5) is not a class (0..3) or 255"
    check(rc == 3 and msg == want, f"label value out of range refused: '{msg}'")
    rc, out, msg = run("label", bpath, "8")
    check(rc == 0, "same mask accepted with 8 classes")
    # RGB is not a mask.
    rpath = os.path.join(tmp, "rgb.png")
    Image.fromarray(rng.integers(0, 256, size=(h, w, 3)).astype(np.uint8), "RGB").save(rpath)
    rc, out, msg = run("label", rpath)
    check(rc == 3 and msg.startswith(rpath + ": label mask must be"), f"RGB refused as label: '{msg}'")


def check_save(tmp):
    """pngio_save output read back by PIL, at each kind of filter choice."""
    rng = np.random.default_rng(11)
    rgb = rng.integers(0, 256, size=(9, 17, 3)).astype(np.uint8)
    rgb[:, :8] = (200, 30, 10)  # flat area so filters and zlib have work to do
    src = os.path.join(tmp, "src_rgb.png")
    Image.fromarray(rgb, "RGB").save(src)
    grey = rng.integers(0, 256, size=(11, 5)).astype(np.uint8)
    gsrc = os.path.join(tmp, "src_l.png")
    Image.fromarray(grey, "L").save(gsrc)
    for level in (0, 1, 6, 9):
        dst = os.path.join(tmp, f"out_rgb_{level}.png")
        rc, _, msg = run("save", "rgb", src, dst, str(level))
        ok = rc == 0 and np.array_equal(np.asarray(Image.open(dst)), rgb)
        check(ok and Image.open(dst).mode == "RGB", f"save RGB level {level} read by PIL exact {msg}")
        dst = os.path.join(tmp, f"out_l_{level}.png")
        rc, _, msg = run("save", "label", gsrc, dst, str(level))
        ok = rc == 0 and np.array_equal(np.asarray(Image.open(dst)), grey)
        check(ok and Image.open(dst).mode == "L", f"save grey level {level} read by PIL exact {msg}")
    dst = os.path.join(tmp, "no", "such", "dir.png")
    rc, _, msg = run("save", "rgb", src, dst, "1")
    check(rc == 3 and msg.startswith(dst + ": cannot create"), f"save into missing folder refused: '{msg}'")


def main():
    if not os.access(TOOL, os.X_OK):
        print(f"FAIL {TOOL} not built")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        check_suite(tmp)
        check_labels(tmp)
        check_save(tmp)
    print(f"pngsuite: {refcheck.failures()} failures")
    return refcheck.status()


if __name__ == "__main__":
    sys.exit(main())
