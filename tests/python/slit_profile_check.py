"""Partition coefficient of a slit computed with numpy from a thicket file
read with h5py, by the same definition as thicket's report (reference
density in the central half of the open gap), independently implemented.

Usage: slit_profile_check.py FILE SPECIES WIDTH_NM RADIUS_NM; prints JSON
{"partition": K, "counts_in_reference": n}.
"""

import json
import sys

import h5py
import numpy as np


def main(path, species, width, radius):
    with h5py.File(path, "r") as f:
        z = f["particles"][species]["position/value"][()][:, :, 2].astype(np.float64)
    half_open = 0.5 * width - radius
    in_ref = np.abs(z - 0.5 * width) <= 0.5 * half_open
    n_ref = int(in_ref.sum())
    # K = (all / W) / (reference / reference width), per unit area and frame.
    k = (z.size / width) / (n_ref / half_open)
    print(json.dumps({"partition": k, "counts_in_reference": n_ref}))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], float(sys.argv[3]), float(sys.argv[4]))
