"""Reads CSV files with pandas' default options (the outside reader) and
reports, per file, the rows, the columns and which columns are numeric.

Usage: pandas_check.py FILE [FILE ...]; prints JSON {FILE: {"rows": n,
"columns": [...], "numeric": [...]}}.
"""

import json
import sys

import pandas as pd
from pandas.api.types import is_numeric_dtype


def main(paths):
    out = {}
    for path in paths:
        frame = pd.read_csv(path)
        out[path] = {
            "rows": int(len(frame)),
            "columns": [str(c) for c in frame.columns],
            "numeric": [str(c) for c in frame.columns if is_numeric_dtype(frame[c])],
        }
    print(json.dumps(out))


if __name__ == "__main__":
    main(sys.argv[1:])
