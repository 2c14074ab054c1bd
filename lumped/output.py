"""Writing run results: CSV (one header row, ``time [s]`` first, then
``ID.quantity [unit]``, numbers at full precision) and Parquet, each replacing the
target atomically (a temporary file beside it, then a rename)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np

from lumped.errors import LumpedError

__all__ = ["write_result", "OutputError", "FORMATS"]

FORMATS = (".csv", ".parquet")
#: Rows formatted per block when writing CSV (bounds the memory of the text).
CSV_BLOCK_ROWS = 20000


class OutputError(LumpedError):
    """An output path the tool cannot write."""


def _columns(result):
    channels = result.channels()
    names = [f"{name} [{unit}]" for name, (unit, _) in channels.items()]
    names[0] = "time [s]"
    data = np.column_stack([values for _, values in channels.values()])
    return names, data


def _umask() -> int:
    """The process's file-creation mask (read by setting it, then put back)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def write_result(result, path: str | os.PathLike) -> Path:
    """Write ``result`` to ``path`` (.csv or .parquet), replacing it atomically."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise OutputError(f"{path}: output must end in {' or '.join(FORMATS)}")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"{path}: folder {folder} does not exist")
    names, data = _columns(result)
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".tmp")
    try:
        if suffix == ".csv":
            with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
                handle.write(",".join(names) + "\n")
                row_format = ",".join(["%r"] * data.shape[1]) + "\n"
                for start in range(0, len(data), CSV_BLOCK_ROWS):
                    block = data[start:start + CSV_BLOCK_ROWS].tolist()
                    handle.write("".join(row_format % tuple(row) for row in block))
        else:
            os.close(fd)
            import pandas as pd

            pd.DataFrame(data, columns=names).to_parquet(tmp, index=False)
        os.chmod(tmp, 0o666 & ~_umask())  # the temporary file's 0600 would be the output's
        os.replace(tmp, path)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise OutputError(f"{path}: cannot write ({exc.strerror})") from None
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
