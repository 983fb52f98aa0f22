#!/usr/bin/env python3
"""Batch exact k-NN on Fashion-MNIST with numpy and its BLAS: the general-purpose baseline for the exact index.

10,000 test images as queries against the 60,000 training images (784 pixels / 255), top 10 by squared Euclidean
distance. Distances come from the norms and one sgemm (||q||^2 + ||x||^2 - 2 q.x), then argpartition picks the 10
smallest per query and a sort orders them (ties by ascending id, as the library orders them).

Prints the BLAS build and the kernel it chose, the sgemm time and GFLOP/s alone (best of the repetitions), and the
end-to-end queries/s (norms + sgemm + selection). Writes the top-10 ids as a little-endian int32 file of
queries x 10 so the library's answers can be compared with these. Threads come from OPENBLAS_NUM_THREADS.

Usage: exact_knn_numpy.py [--data DIR] [--out FILE] [--repeat N] [--queries N]
"""
import argparse
import ctypes
import gzip
import os
import sys
import time

import numpy as np


def read_idx_images(path):
    with gzip.open(path, "rb") as f:
        raw = f.read()
    magic, count, rows, cols = np.frombuffer(raw[:16], dtype=">u4")
    if magic != 2051:
        sys.exit(f"{path}: not an idx3 image file (magic {magic})")
    pixels = np.frombuffer(raw[16:], dtype=np.uint8, count=int(count * rows * cols))
    return (pixels.reshape(int(count), int(rows * cols)).astype(np.float32)) / np.float32(255.0)


def openblas_library():
    """The OpenBLAS shared object this process loaded, found through /proc/self/maps."""
    try:
        with open("/proc/self/maps") as maps:
            for line in maps:
                name = line.split()[-1]
                if "openblas" in name.lower() and ".so" in os.path.basename(name):
                    return name
    except OSError:
        pass
    return None


def describe_blas():
    try:
        from threadpoolctl import threadpool_info  # Debian python3-threadpoolctl, when installed

        for pool in threadpool_info():
            if pool.get("user_api") == "blas":
                print(f"blas (threadpoolctl): {pool.get('internal_api')} {pool.get('version')} "
                      f"core={pool.get('architecture')} threads={pool.get('num_threads')} file={pool.get('filepath')}")
                return
    except ImportError:
        pass
    path = openblas_library()
    if path is None:
        print("blas: no OpenBLAS loaded (reference BLAS?); the sgemm figure below is not OpenBLAS's")
        return
    lib = ctypes.CDLL(path)
    lib.openblas_get_corename.restype = ctypes.c_char_p
    lib.openblas_get_config.restype = ctypes.c_char_p
    print(f"blas (openblas_get_corename): core={lib.openblas_get_corename().decode()} "
          f"config={lib.openblas_get_config().decode()} threads={lib.openblas_get_num_threads()} file={path}")


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--data", default=os.environ.get("VECTORKIT_FASHION_MNIST", "/usr/share/datasets/fashion-mnist"))
    parser.add_argument("--out", default=None, help="top-10 ids, int32 little-endian, queries x 10")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--queries", type=int, default=10_000)
    args = parser.parse_args()
    k = 10

    print(f"numpy {np.__version__}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')} "
          f"OPENBLAS_L2_SIZE={os.environ.get('OPENBLAS_L2_SIZE', '(unset)')} "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}")
    describe_blas()

    items = np.ascontiguousarray(read_idx_images(os.path.join(args.data, "train-images-idx3-ubyte.gz")))
    queries = np.ascontiguousarray(read_idx_images(os.path.join(args.data, "t10k-images-idx3-ubyte.gz"))[: args.queries])
    n, d = items.shape
    m = queries.shape[0]
    flops = 2.0 * m * n * d
    print(f"data: {m} queries x {n} items x {d}, top {k}, squared Euclidean; sgemm work {flops / 1e9:.1f} GFLOP")

    item_norms = np.einsum("ij,ij->i", items, items)
    itemsT = np.ascontiguousarray(items.T)
    products = np.empty((m, n), dtype=np.float32)
    products.fill(0.0)  # touch the pages now, so the first sgemm does not time page faults
    top = None
    np.matmul(queries[:64], itemsT, out=products[:64])  # untimed: BLAS threads started, code paged in
    for repetition in range(args.repeat):
        # sgemm alone, into a preallocated output.
        start = time.perf_counter()
        np.matmul(queries, itemsT, out=products)
        sgemm = time.perf_counter() - start

        # End to end: norms, sgemm, distances, selection.
        start = time.perf_counter()
        query_norms = np.einsum("ij,ij->i", queries, queries)
        np.matmul(queries, itemsT, out=products)
        products *= np.float32(-2.0)
        products += item_norms[np.newaxis, :]
        products += query_norms[:, np.newaxis]
        part = np.argpartition(products, k - 1, axis=1)[:, :k]
        dist = np.take_along_axis(products, part, axis=1)
        order = np.lexsort((part, dist), axis=1)
        top = np.take_along_axis(part, order, axis=1)
        total = time.perf_counter() - start
        print(f"repetition {repetition + 1}: sgemm {sgemm:.3f} s = {flops / sgemm / 1e9:.1f} GFLOP/s; "
              f"end to end {total:.3f} s = {m / total:.0f} queries/s")

    if args.out:
        top.astype("<i4").tofile(args.out)
        print(f"top-{k} ids written to {args.out} ({m} x {k} int32)")


if __name__ == "__main__":
    main()
