"""Time-averaged MSD computed with numpy from a thicket file read with h5py.

Usage: msd_check.py FILE SPECIES LAG [LAG ...]; prints JSON {"lags": [...],
"msd_axes_nm2": [[x...], [y...], [z...]]}: for each lag m, the mean over
particles and all origins of the squared unwrapped displacement per axis.
"""

import json
import sys

import h5py
import numpy as np


def main(path, species, lags):
    with h5py.File(path, "r") as f:
        g = f["particles"][species]
        x = g["position/value"][()].astype(np.float64)
        image = g["image/value"][()]
        edges = g["box/edges"][()]
    u = x + image * edges
    out = [[], [], []]
    for m in lags:
        d = u[m:] - u[:-m]
        per_axis = (d**2).mean(axis=(0, 1))
        for k in range(3):
            out[k].append(float(per_axis[k]))
    print(json.dumps({"lags": lags, "msd_axes_nm2": out}))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], [int(a) for a in sys.argv[3:]])
