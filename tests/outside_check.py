#!/usr/bin/env python3
"""Outside check of the hashing vectors with general-purpose libraries.

Recomputes every Toeplitz, modified Toeplitz and two-source case of vectors/*.vec without
any sluice code, from the definitions of spec/conventions.md:

- Toeplitz: y_i = XOR_j s[i - j + n - 1] x[j], i.e. entries n-1 .. n+m-2 of the
  integer convolution s * x, taken mod 2. Computed with numpy.convolve (exact
  integer arithmetic) for cases given in full, and additionally with an explicit
  matrix built by scipy.linalg.toeplitz for n, m <= 2048; larger cases (above
  2^28 multiply-adds, and the 2^20 and 2^24 recipe cases) with
  scipy.signal.fftconvolve (float64 FFT, rounded to integers).
- Modified Toeplitz: y = x_head XOR T' x_tail with T' built the same way from
  the n - 1 seed bits.
- Two-source (spec/hashing-and-composition.md 6.2): z_i = XOR_j x_j y[(i+j) mod n],
  the `seed` line holding the second source y. Computed from the polynomial
  form: the integer convolution of Xrev (Xrev_j = x[(-j) mod n]) with y by
  numpy.convolve (scipy.signal.fftconvolve above 2^28 multiply-adds), folded
  mod z^n - 1 (p_i + p_{i+n}), parity; and for n <= 2048 also directly as the
  inner products of x with y rotated by i places (numpy.roll), parity.
- Recipe inputs are SHAKE256 (hashlib, FIPS 202) of the label; data digests
  are BLAKE3 (the blake3 package) of the 8-byte little-endian bit length and
  the packed bytes.

Usage: outside_check.py VECTOR_DIR [--skip-large] [--max-input-bits N]. Cases with
more than N input bits (default 2^26: the float FFT of larger whole-run cases needs
more than 8 GiB) are skipped and counted. Exit status 0 when every case matches, 1
otherwise, 3 when numpy/scipy/blake3 are missing.
"""
import hashlib
import os
import sys

try:
    import numpy as np
    import scipy.linalg
    import scipy.signal
    import blake3
except ImportError as e:  # pragma: no cover
    print(f"missing python package: {e}", file=sys.stderr)
    sys.exit(3)


def bits_from_bytes(data: bytes, n: int) -> np.ndarray:
    a = np.unpackbits(np.frombuffer(data, dtype=np.uint8), bitorder="big")
    return a[:n].astype(np.int64)


def bytes_from_bits(bits: np.ndarray) -> bytes:
    return np.packbits(bits.astype(np.uint8), bitorder="big").tobytes()


def data_digest(bits: np.ndarray) -> str:
    h = blake3.blake3()
    h.update(len(bits).to_bytes(8, "little"))
    h.update(bytes_from_bits(bits))
    return h.hexdigest()


def parse(path):
    cases, cur = [], None
    with open(path) as f:
        lines = [l.strip() for l in f]
    body = [l for l in lines if l and not l.startswith("#")]
    assert body[0] == "sluice-vectors 1", f"{path}: bad header"
    for l in body[1:]:
        key, _, value = l.partition(" ")
        if key == "case":
            cur = {"name": value, "param": {}}
        elif key == "end":
            cases.append(cur)
            cur = None
        elif key == "param":
            k, _, v = value.partition(" ")
            cur["param"][k] = v
        else:
            cur[key] = value
    return cases


def get_bits(case, what, n):
    if what in case:
        return bits_from_bytes(bytes.fromhex(case[what]), n)
    label = case[what + "-shake256"]
    return bits_from_bytes(hashlib.shake_256(label.encode()).digest((n + 7) // 8), n)


def toeplitz_window(x, s, m, use_fft):
    n = len(x)
    # Exact integer convolution up to 2^28 multiply-adds; float FFT above.
    if use_fft or n * len(s) > 1 << 28:
        c = np.rint(scipy.signal.fftconvolve(s.astype(np.float64), x.astype(np.float64))).astype(np.int64)
    else:
        c = np.convolve(s, x)
    return c[n - 1 : n - 1 + m] % 2


def toeplitz_matrix(x, s, m):
    # T[i][j] = s[i - j + n - 1]: first column s[n-1 .. n+m-2], first row s[n-1], s[n-2], ..., s[0]
    n = len(x)
    col = s[n - 1 : n - 1 + m]
    row = s[n - 1 :: -1][:n]
    t = scipy.linalg.toeplitz(col, row)
    return (t @ x) % 2


def two_source(x, y, m):
    n = len(x)
    xrev = np.roll(x[::-1], 1)  # xrev[j] = x[(-j) mod n]
    if n * n > 1 << 28:
        p = np.rint(scipy.signal.fftconvolve(xrev.astype(np.float64), y.astype(np.float64))).astype(np.int64)
    else:
        p = np.convolve(xrev, y)
    folded = p[:n].copy()
    folded[: n - 1] += p[n:]
    return folded[:m] % 2


def two_source_rotations(x, y, m):
    return np.array([int(x @ np.roll(y, -i)) % 2 for i in range(m)], dtype=np.int64)


def check_two_source(case):
    n, m = int(case["input-bits"]), int(case["output-bits"])
    x = get_bits(case, "input", n)
    y = get_bits(case, "seed", n)
    z = two_source(x, y, m)
    if n <= 2048 and not np.array_equal(z, two_source_rotations(x, y, m)):
        return "numpy convolution and rotations disagree"
    if "output" in case:
        want = bits_from_bytes(bytes.fromhex(case["output"]), m)
        if not np.array_equal(z, want):
            return f"output differs from bit {int(np.argmax(z != want))}"
    if "output-digest" in case and data_digest(z) != case["output-digest"]:
        return "output digest differs"
    return ""


def check(case, skip_large, max_bits):
    fam = case["extractor"]
    if int(case["input-bits"]) > max_bits:
        return "skip"
    if fam == "two-source":
        return check_two_source(case)
    if fam not in ("toeplitz", "modified-toeplitz"):
        return None
    n, m = int(case["input-bits"]), int(case["output-bits"])
    large = "input" not in case
    if large and skip_large:
        return None
    x = get_bits(case, "input", n)
    d = n + m - 1 if fam == "toeplitz" else n - 1
    s = get_bits(case, "seed", d)
    for what, bits in (("input", x), ("seed", s)):
        if what + "-digest" in case and data_digest(bits) != case[what + "-digest"]:
            return f"{what} digest differs"
    if fam == "toeplitz":
        y = toeplitz_window(x, s, m, large)
        if n <= 2048 and m <= 2048 and not np.array_equal(y, toeplitz_matrix(x, s, m)):
            return "numpy convolution and scipy matrix disagree"
    else:
        tail = x[m:]
        y = (x[:m] + toeplitz_window(tail, s, m, large)) % 2
        if n <= 2048:
            y2 = (x[:m] + toeplitz_matrix(tail, s, m)) % 2
            if not np.array_equal(y, y2):
                return "numpy convolution and scipy matrix disagree"
    if "output" in case:
        want = bits_from_bytes(bytes.fromhex(case["output"]), m)
        if not np.array_equal(y, want):
            return f"output differs from bit {int(np.argmax(y != want))}"
    if "output-digest" in case and data_digest(y) != case["output-digest"]:
        return "output digest differs"
    return ""


def main():
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    skip_large = "--skip-large" in sys.argv
    max_bits = 1 << 26
    if "--max-input-bits" in sys.argv:
        max_bits = int(sys.argv[sys.argv.index("--max-input-bits") + 1])
        args = [a for a in args if a != str(max_bits)]
    folder = args[0] if args else "vectors"
    bad = total = skipped = 0
    for fn in sorted(os.listdir(folder)):
        if not fn.endswith(".vec"):
            continue
        for case in parse(os.path.join(folder, fn)):
            r = check(case, skip_large, max_bits)
            if r is None:
                continue
            if r == "skip":
                skipped += 1
                continue
            total += 1
            if r:
                bad += 1
                print(f"FAIL {fn} {case['name']}: {r}")
    print(f"numpy/scipy outside check: {total - bad} passed, {bad} failed, {skipped} skipped (above {max_bits} input bits)")
    sys.exit(1 if bad or total == 0 else 0)


if __name__ == "__main__":
    main()
