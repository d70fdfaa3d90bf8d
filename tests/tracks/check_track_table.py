"""Outside reader of the per-track table of `thicket analyze TRACKS.csv`:
pandas with default options (pandas.read_csv), and the detections CSV the
table came from. Prints one JSON object.

Usage: check_track_table.py TABLE.csv DETECTIONS.csv
"""
import json
import sys

import pandas as pd


def main():
    table = pd.read_csv(sys.argv[1])
    detections = pd.read_csv(sys.argv[2])
    analysed = table[table["analysed"] == 1]
    d = analysed["d_cve_um2_per_s"]
    out = {
        "columns": list(table.columns),
        "numeric": {c: bool(pd.api.types.is_numeric_dtype(table[c])) for c in table.columns},
        "rows": int(len(table)),
        "tracks_in_detections": int(detections["track_id"].nunique()),
        # n_positions against the detections counted by pandas itself
        "positions_match": bool(
            (table.set_index("track_id")["n_positions"]
             == detections.groupby("track_id").size()).all()
        ),
        "analysed": int(len(analysed)),
        "d_cve_mean": float(d.mean()),
        "d_cve_sd": float(d.std(ddof=1)),
        "d0": float(analysed["d0_um2_per_s"].iloc[0]) if "d0_um2_per_s" in table else None,
    }
    print(json.dumps(out))


if __name__ == "__main__":
    main()
