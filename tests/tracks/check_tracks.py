"""Outside checks of `thicket tracks` output, independent of thicket's code.

Usage: check_tracks.py MODE PATH [ARGS]; prints one JSON object.
  csv PATH                 read with the csv module and numpy.genfromtxt (pandas-style parsing)
  h5 PATH                  read the tracks HDF5 file with h5py
  bleach PATH DT TAU       track lengths against the exponential law (scipy.stats.kstest)
  focal PATH PARTICLES FRAMES   fraction of particles detected per frame
"""

import csv
import json
import math
import sys

import numpy as np


def read_columns(path):
    """Columns by name as float arrays, parsed by numpy like pandas.read_csv would."""
    data = np.genfromtxt(path, delimiter=",", names=True, dtype=np.float64)
    data = np.atleast_1d(data)
    return {name: data[name] for name in data.dtype.names}


def mode_csv(path):
    with open(path, newline="") as f:
        reader = csv.reader(f)
        header = next(reader)
        rows = list(reader)
    numeric = True
    for row in rows:
        for field in row:
            try:
                if not math.isfinite(float(field)):
                    numeric = False
            except ValueError:
                numeric = False
    cols = read_columns(path)
    ids = cols["track_id"]
    frames = cols["frame"]
    integral = bool(np.all(ids == np.round(ids)) and np.all(frames == np.round(frames)))
    # Within a track, frames increase by one (camera tracks have no gaps).
    consecutive = True
    sorted_by_track = bool(np.all(np.diff(ids) >= 0))
    for tid in np.unique(ids):
        f = frames[ids == tid]
        if len(f) > 1 and not np.all(np.diff(f) == 1):
            consecutive = False
    out = {
        "header": header,
        "rows": len(rows),
        "fields_per_row": sorted({len(r) for r in rows}),
        "numeric": numeric,
        "genfromtxt_nan": int(sum(int(np.isnan(c).sum()) for c in cols.values())),
        "integral_ids_and_frames": integral,
        "consecutive_frames": consecutive,
        "sorted_by_track": sorted_by_track,
        "tracks": int(len(np.unique(ids))),
    }
    if "time_s" in cols and len(frames) > 1 and frames.max() > 0:
        dt = cols["time_s"][frames > 0] / frames[frames > 0]
        out["frame_interval_s"] = [float(dt.min()), float(dt.max())]
    return out


def mode_h5(path):
    import h5py

    with h5py.File(path, "r") as f:
        det = f["detections"]
        tr = f["tracks"]
        units = {f"{g}/{k}": f[g][k].attrs["unit"].decode() if isinstance(f[g][k].attrs["unit"], bytes) else str(f[g][k].attrs["unit"]) for g in ("detections", "tracks") for k in f[g]}
        species = [s.decode() for s in tr["species"][()]]
        regions = sorted({s.decode() for s in tr["region"][()]})
        d0 = {}
        for s, d in zip(species, tr["d0_m2_per_s"][()]):
            d0[s] = float(d)
        particles = tr["particle"][()]
        frames = tr["frames"][()]
        out = {
            "detection_datasets": sorted(det.keys()),
            "track_datasets": sorted(tr.keys()),
            "units": units,
            "detections": int(det["track_id"].shape[0]),
            "tracks": int(tr["track_id"].shape[0]),
            "distinct_particles": int(len(np.unique(particles))),
            "frames_sum": int(frames.sum()),
            "species": sorted(set(species)),
            "d0_m2_per_s": d0,
            "regions": regions,
            "camera": {k: (v.tolist() if hasattr(v, "tolist") else v) for k, v in f["camera"].attrs.items()},
            "has_scenario": "scenario" in f["parameters/thicket"].attrs,
            "region_names": [s.decode() for s in f["regions"][()]],
            "region_index_max": int(det["region_index"][()].max()) if det["region_index"].shape[0] else -1,
        }
    return out


def mode_bleach(path, dt, tau):
    from scipy import stats

    cols = read_columns(path)
    ids = cols["track_id"].astype(np.int64)
    lengths = np.bincount(ids)
    lengths = lengths[lengths > 0].astype(np.float64)
    # Frame f (exposure 0) sees the emitter if f·Δt < T, so a track of L frames
    # means T in ((L−1)Δt, LΔt]. Drawing T within that interval from the
    # exponential law conditioned on it (randomised probability integral
    # transform) gives exactly Exp(τ) if the lengths follow the law.
    rng = np.random.default_rng(20261206)
    u = rng.random(len(lengths))
    within = -tau * np.log1p(-u * (1.0 - math.exp(-dt / tau)))
    t = (lengths - 1.0) * dt + within
    ks = stats.kstest(t, "expon", args=(0.0, tau))
    wrong = stats.kstest(t, "expon", args=(0.0, 1.15 * tau))
    p_stay = math.exp(-dt / tau)
    return {
        "tracks": int(len(lengths)),
        "max_length": int(lengths.max()),
        "mean_length": float(lengths.mean()),
        "mean_length_se": float(lengths.std(ddof=1) / math.sqrt(len(lengths))),
        "expected_mean_length": 1.0 / (1.0 - p_stay),
        "ks_statistic": float(ks.statistic),
        "ks_pvalue": float(ks.pvalue),
        "ks_pvalue_wrong_lifetime": float(wrong.pvalue),
    }


def mode_focal(path, particles, frames):
    cols = read_columns(path)
    per_frame = np.bincount(cols["frame"].astype(np.int64), minlength=frames)[:frames] / particles
    return {
        "fraction": float(per_frame.mean()),
        "fraction_min": float(per_frame.min()),
        "fraction_max": float(per_frame.max()),
        "tracks": int(len(np.unique(cols["track_id"]))),
    }


def main():
    mode, path = sys.argv[1], sys.argv[2]
    if mode == "csv":
        out = mode_csv(path)
    elif mode == "h5":
        out = mode_h5(path)
    elif mode == "bleach":
        out = mode_bleach(path, float(sys.argv[3]), float(sys.argv[4]))
    elif mode == "focal":
        out = mode_focal(path, int(sys.argv[3]), int(sys.argv[4]))
    else:
        raise SystemExit(f"unknown mode {mode}")
    print(json.dumps(out))


if __name__ == "__main__":
    main()
