#!/usr/bin/env python3
"""Plain numpy baseline for winnow's fit benchmark (scripts/bench).

Reads a gzip NIfTI-1 4D run into memory (gzip + numpy.frombuffer), masks it
(values above 30 % of the first volume's 98th percentile of positive values,
without any morphology), solves ordinary least squares for every in-mask voxel
with the design matrix given as a TSV (a header row, one row per volume; the
bench passes the design.tsv that `winnow fit` wrote for the same run), and
computes the lag-1 autocorrelation of each voxel's residuals. This is the
in-memory way of doing the first steps of a first-level fit; it is a timing
baseline, not a statistical reference.

Prints one JSON object: voxels, volumes, columns, seconds per stage and the
median residual lag-1 autocorrelation.

usage: fit_numpy.py --bold RUN.nii.gz --design design.tsv
"""

import argparse
import gzip
import json
import struct
import sys
import time

import numpy as np

# NIfTI-1 datatype codes (nifti1.h) to numpy element types.
DTYPES = {2: "u1", 4: "i2", 8: "i4", 16: "f4", 64: "f8", 256: "i1", 512: "u2", 768: "u4", 1024: "i8", 1280: "u8"}


def read_nifti(path):
    with gzip.open(path, "rb") as f:
        raw = f.read()
    if len(raw) < 348:
        sys.exit(f"{path}: {len(raw)} bytes, want a NIfTI-1 header of 348")
    order = "<" if struct.unpack("<i", raw[0:4])[0] == 348 else ">"
    if struct.unpack(order + "i", raw[0:4])[0] != 348:
        sys.exit(f"{path}: sizeof_hdr is not 348; want NIfTI-1")
    dim = struct.unpack(order + "8h", raw[40:56])
    datatype = struct.unpack(order + "h", raw[70:72])[0]
    vox_offset = int(struct.unpack(order + "f", raw[108:112])[0])
    slope, inter = struct.unpack(order + "2f", raw[112:120])
    if datatype not in DTYPES:
        sys.exit(f"{path}: datatype {datatype} is not handled here")
    nx, ny, nz, nt = dim[1], dim[2], dim[3], max(dim[4], 1)
    nvox = nx * ny * nz
    data = np.frombuffer(raw, dtype=order + DTYPES[datatype], count=nvox * nt, offset=vox_offset)
    data = data.reshape(nt, nvox)
    if slope == 0 or not np.isfinite(slope):
        slope, inter = 1.0, 0.0
    return data, float(slope), float(inter), raw


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bold", required=True)
    ap.add_argument("--design", required=True)
    a = ap.parse_args()

    t0 = time.perf_counter()
    data, slope, inter, raw = read_nifti(a.bold)
    t_read = time.perf_counter()

    first = data[0].astype(np.float64) * slope + inter
    pos = first[first > 0]
    if pos.size == 0:
        sys.exit("no positive voxel in the first volume")
    mask = first > 0.3 * np.percentile(pos, 98)
    y = data[:, mask].astype(np.float64)
    del raw, data
    if slope != 1.0 or inter != 0.0:
        y *= slope
        y += inter
    t_mask = time.perf_counter()

    x = np.loadtxt(a.design, delimiter="\t", skiprows=1, ndmin=2)
    if x.shape[0] != y.shape[0]:
        sys.exit(f"{a.design}: {x.shape[0]} rows, want {y.shape[0]} (one per volume)")
    beta, _, rank, _ = np.linalg.lstsq(x, y, rcond=None)
    y -= x @ beta  # y now holds the residuals
    t_ols = time.perf_counter()

    ss = np.einsum("ij,ij->j", y, y)
    lag1 = np.einsum("ij,ij->j", y[1:], y[:-1])
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = lag1 / ss
    sigma2 = ss / (y.shape[0] - rank)
    t_ar = time.perf_counter()

    print(json.dumps({
        "voxels": int(y.shape[1]),
        "volumes": int(y.shape[0]),
        "columns": int(x.shape[1]),
        "rank": int(rank),
        "seconds": {"read": t_read - t0, "mask": t_mask - t_read, "ols": t_ols - t_mask, "lag1": t_ar - t_ols,
                    "total": t_ar - t0},
        "median_rho": float(np.nanmedian(rho)),
        "median_sigma2": float(np.nanmedian(sigma2)),
    }))


if __name__ == "__main__":
    main()
