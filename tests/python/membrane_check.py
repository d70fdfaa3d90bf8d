"""Steady-state membrane flux, bath-to-bath permeability and pore partition
coefficient computed with numpy from a thicket file read with h5py, from
the per-frame series /observables/<species>/membrane and the stored
parameters, by the definitions stored beside them (independent of the
thicket-analysis code). For a run without wall hydrodynamics, where the
bath step is sqrt(2 D0 dt).

Usage: membrane_check.py FILE SPECIES; prints JSON {"flux_particles_per_s",
"permeability_bath_to_bath_m_per_s", "partition"}.
"""

import json
import math
import sys

import h5py
import numpy as np


def main(path, species):
    with h5py.File(path, "r") as f:
        g = f["observables"][species]["membrane"]
        columns = g["value"].attrs["columns"]
        if isinstance(columns, bytes):
            columns = columns.decode()
        col = {name: i for i, name in enumerate(columns.split(","))}
        v = g["value"][()].astype(np.int64)
        t = g["time"][()]
        step = g["step"][()]
        p = f["parameters/thicket"]
        dt = float(p.attrs["dt_s"])
        geo = p["geometry"]
        flux_after = float(geo.attrs["flux_after_s"])
        porosity = float(geo.attrs["porosity"])
        thickness = float(geo.attrs["thickness_nm"])
        d0 = float(p["species"][species].attrs["d0_m2_per_s"]) * 1e18
        edges = f["particles"][species]["box/edges"][()]
    area = edges[0] * edges[1]
    k0 = int(np.argmax(t >= flux_after))
    last = len(t) - 1
    steps = float(step[last] - step[k0])
    d = v[last] - v[k0]
    net = d[col["crossings_down"]] - d[col["crossings_up"]]
    flux = net / (steps * dt)
    sigma = math.sqrt(2.0 * d0 * dt)
    # A bath at number density c emits c A sigma / sqrt(2 pi) particles per step.
    dens = [
        d[col[c]] * math.sqrt(2.0 * math.pi) / (area * sigma * steps)
        for c in ("entries_bottom", "entries_top")
    ]
    permeability = flux / area / (dens[1] - dens[0]) * 1e-9
    pores = v[k0 : last + 1, col["particles_in_pores"]].mean()
    partition = pores / (porosity * area * thickness) / (0.5 * (dens[0] + dens[1]))
    print(
        json.dumps(
            {
                "flux_particles_per_s": flux,
                "permeability_bath_to_bath_m_per_s": permeability,
                "partition": partition,
            }
        )
    )


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
