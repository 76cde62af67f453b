"""JSON output shared by the commands: numpy, pandas, dates, paths and NaN (as null)."""

from __future__ import annotations

import dataclasses
import datetime as _dt
import json
import math
from pathlib import Path
from typing import Any

__all__ = ["jsonable", "dumps"]


def jsonable(obj: Any) -> Any:
    """A structure of plain Python types that :func:`json.dumps` accepts (NaN and inf become None)."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple | set | frozenset):
        return [jsonable(v) for v in obj]
    if isinstance(obj, bool) or obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, int):
        return obj
    if isinstance(obj, float):
        return None if not math.isfinite(obj) else obj
    if isinstance(obj, Path):
        return str(obj)
    if isinstance(obj, _dt.datetime | _dt.date):
        return obj.isoformat()
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return jsonable({f.name: getattr(obj, f.name) for f in dataclasses.fields(obj)})
    mod = type(obj).__module__
    if mod.startswith("numpy"):
        import numpy as np

        if isinstance(obj, np.ndarray):
            return jsonable(obj.tolist())
        if isinstance(obj, np.bool_):
            return bool(obj)
        if isinstance(obj, np.integer):
            return int(obj)
        if isinstance(obj, np.floating):
            return jsonable(float(obj))
        if isinstance(obj, np.datetime64):
            import pandas as pd

            return None if pd.isna(obj) else pd.Timestamp(obj).isoformat()
    if mod.startswith("pandas"):
        import pandas as pd

        if obj is pd.NaT:
            return None
        if isinstance(obj, pd.Timestamp):
            return obj.isoformat()
        if isinstance(obj, pd.Series):
            return jsonable(obj.to_dict())
        if isinstance(obj, pd.DataFrame):
            return jsonable(obj.reset_index().to_dict(orient="records"))
    if hasattr(obj, "to_dict"):
        return jsonable(obj.to_dict())
    return str(obj)


def dumps(obj: Any, indent: int | None = 2) -> str:
    """Serialise ``obj`` (see :func:`jsonable`) as strict JSON."""
    return json.dumps(jsonable(obj), indent=indent, allow_nan=False, ensure_ascii=False)
