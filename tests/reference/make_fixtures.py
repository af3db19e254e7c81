#!/usr/bin/env python3
"""Writes the outside-reference fixtures used by
crates/orbitspan-core/tests/outside_reference.rs.

The reference values come from NumPy (numpy.linalg.svd, numpy.fft.fft2), an
implementation independent of orbitspan. Inputs are drawn from
numpy.random.default_rng with fixed seeds, so the script is deterministic.

Usage:
    python3 tests/reference/make_fixtures.py          # (re)write the fixtures
    python3 tests/reference/make_fixtures.py --check  # compare with the committed
                                                      # fixtures, exit 1 on a difference

--check compares numbers to 1e-12 relative rather than byte for byte, because
LAPACK and FFT builds may differ in the last bits.
"""

import json
import pathlib
import sys

import numpy as np

FIXTURES = pathlib.Path(__file__).resolve().parent / "fixtures"
CHECK_RTOL = 1e-12


def svd_stack():
    """A stack of 5 images of 6x4 pixels. The data matrix has one row per
    image (the image's pixels, row-major), shape (5, 24). Its singular values
    sigma_1 >= ... >= sigma_5 give the Eckart-Young error of the best
    L-dimensional subspace: E(L) = sum_{k > L} sigma_k^2."""
    rng = np.random.default_rng(20240611)
    count, height, width = 5, 6, 4
    images = rng.random((count, height, width))
    data = images.reshape(count, height * width)
    sigma = np.linalg.svd(data, compute_uv=False)
    squares = sigma**2
    # Sum the discarded squares (no difference of large numbers).
    tail = [float(np.sum(squares[L:])) for L in range(1, count + 1)]
    return {
        "source": "NumPy numpy.linalg.svd",
        "description": "images are the rows of the data matrix; "
        "tail_sums[L-1] = sum of sigma_k^2 for k > L",
        "height": height,
        "width": width,
        "images": [img.reshape(-1).tolist() for img in images],
        "singular_values": sigma.tolist(),
        "generators": list(range(1, count + 1)),
        "tail_sums": tail,
        "total_energy": float(np.sum(data**2)),
    }


def fft2():
    """A 5x6 real image (odd and even side) and its unnormalised forward DFT
    F(k1, k2) = sum_{x1, x2} f(x1, x2) exp(-2 pi i (k1 x1 / 5 + k2 x2 / 6)),
    row-major."""
    rng = np.random.default_rng(7)
    height, width = 5, 6
    image = rng.standard_normal((height, width))
    spectrum = np.fft.fft2(image)
    return {
        "source": "NumPy numpy.fft.fft2",
        "description": "unnormalised forward DFT, row-major (rows = first axis)",
        "height": height,
        "width": width,
        "image": image.reshape(-1).tolist(),
        "re": spectrum.real.reshape(-1).tolist(),
        "im": spectrum.imag.reshape(-1).tolist(),
    }


FIXTURE_BUILDERS = {"svd_stack.json": svd_stack, "fft2.json": fft2}


def numbers_close(a, b, path):
    """Returns a list of differences between two JSON values; numbers are
    compared to CHECK_RTOL relative to the largest magnitude in their list."""
    if isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            return [f"{path}: length {len(a)} != {len(b)}"]
        scale = max([abs(x) for x in b if isinstance(x, (int, float))] or [0.0])
        out = []
        for i, (x, y) in enumerate(zip(a, b)):
            if isinstance(x, (int, float)) and isinstance(y, (int, float)):
                if abs(x - y) > CHECK_RTOL * max(scale, 1e-300):
                    out.append(f"{path}[{i}]: {x!r} != {y!r}")
            else:
                out.extend(numbers_close(x, y, f"{path}[{i}]"))
        return out
    if isinstance(a, dict) and isinstance(b, dict):
        if set(a) != set(b):
            return [f"{path}: keys {sorted(a)} != {sorted(b)}"]
        out = []
        for key in a:
            out.extend(numbers_close(a[key], b[key], f"{path}.{key}"))
        return out
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if abs(a - b) > CHECK_RTOL * max(abs(b), 1e-300):
            return [f"{path}: {a!r} != {b!r}"]
        return []
    return [] if a == b else [f"{path}: {a!r} != {b!r}"]


def main(argv):
    check = "--check" in argv[1:]
    problems = []
    for name, build in FIXTURE_BUILDERS.items():
        value = build()
        path = FIXTURES / name
        if check:
            if not path.exists():
                problems.append(f"{path}: missing")
                continue
            committed = json.loads(path.read_text())
            problems.extend(numbers_close(value, committed, name))
        else:
            FIXTURES.mkdir(parents=True, exist_ok=True)
            path.write_text(json.dumps(value, indent=1) + "\n")
            print(f"wrote {path}")
    if problems:
        print("fixtures differ from a fresh NumPy run:", file=sys.stderr)
        for line in problems:
            print("  " + line, file=sys.stderr)
        return 1
    if check:
        print("fixtures agree with a fresh NumPy run")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
