"""Outside check of a free-diffusion trajectory, independent of thicket's analysis code.

Reads a thicket H5MD file with h5py, unwraps positions with the image counts,
estimates D from displacements with numpy and tests the per-axis frame-to-frame
displacements against the normal law with scipy.stats.kstest.
Prints one JSON object.
"""

import json
import sys

import h5py
import numpy as np
from scipy import stats


def main(path: str, species: str) -> None:
    with h5py.File(path, "r") as f:
        g = f["particles"][species]
        x = g["position/value"][()].astype(np.float64)
        image = g["image/value"][()]
        edges = g["box/edges"][()]
        t = g["position/time"][()]
        d0_nm2 = float(f["parameters/thicket/species"][species].attrs["d0_m2_per_s"]) * 1e18
    unwrapped = x + image * edges
    frames, n, _ = unwrapped.shape
    span = t[-1] - t[0]
    # Whole-run displacement: one independent sample per particle and axis.
    disp = unwrapped[-1] - unwrapped[0]
    per_sample = disp.reshape(-1) ** 2 / (2.0 * span)
    d_hat = per_sample.mean()
    d_se = per_sample.std(ddof=1) / np.sqrt(per_sample.size)
    # Frame-to-frame steps, scaled by the Einstein variance 2 D0 Δt.
    dt = t[1] - t[0]
    steps = np.diff(unwrapped, axis=0) / np.sqrt(2.0 * d0_nm2 * dt)
    ks = [stats.kstest(steps[:, :, k].reshape(-1), "norm") for k in range(3)]
    msd_lag1 = float((np.diff(unwrapped, axis=0) ** 2).sum(axis=2).mean())
    print(
        json.dumps(
            {
                "frames": frames,
                "particles": n,
                "d_nm2_per_s": d_hat,
                "d_se_nm2_per_s": d_se,
                "d0_nm2_per_s": d0_nm2,
                "ks_pvalues": [r.pvalue for r in ks],
                "msd_lag1_nm2": msd_lag1,
                "dt_frame_s": dt,
            }
        )
    )


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
