"""Plain-data and JSON helpers shared by the CLI, the store and the reports.

JSON never carries NaN or Infinity tokens: -inf (digital silence) is written as
the string "-inf", +inf as "inf", NaN as null (NaN should never occur).
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from checker.model.names import has_surrogates, readable_data


def plain(value: Any) -> Any:
    """numpy scalars/arrays and tuples -> Python floats, ints, lists (pickle/JSON friendly)."""
    kind = type(value)  # the common cases first: a measurement has ~170 values per file
    if kind is str or kind is int or kind is bool or value is None:
        return value
    if kind is float:
        return None if value != value else value
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (np.floating, float)):
        x = float(value)
        return None if math.isnan(x) else x
    return value


def json_safe(value: Any) -> Any:
    """plain() plus -inf/inf as strings, in one pass (results.jsonl writes thousands of points)."""
    kind = type(value)  # the common cases first, without a call per finite float in a list
    if kind is str or kind is int or kind is bool or value is None:
        return value
    if kind is list or kind is tuple:
        return [v if type(v) is float and v - v == 0.0 else json_safe(v) for v in value]
    if kind is dict:  # a measurement's values: mostly finite floats, text and ints
        return {
            str(k): v
            if (t := type(v)) is str or t is int or (t is float and v - v == 0.0) or v is None
            else json_safe(v)
            for k, v in value.items()
        }
    if isinstance(value, float):
        if value != value:
            return None
        if value in (math.inf, -math.inf):
            return "-inf" if value < 0 else "inf"
        return value
    if isinstance(value, (str, int, bool)) or value is None:
        return value
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return [json_safe(v) for v in value.tolist()]
    return json_safe(plain(value))


def from_json_safe(value: Any) -> Any:
    """Inverse of json_safe for the strings it writes."""
    if isinstance(value, dict):
        return {k: from_json_safe(v) for k, v in value.items()}
    if isinstance(value, list):
        return [from_json_safe(v) for v in value]
    if value == "-inf":
        return -math.inf
    if value == "inf":
        return math.inf
    return value


def dumps(value: Any) -> str:
    return json.dumps(json_safe(value), allow_nan=False, ensure_ascii=False, sort_keys=False)


def dumps_readable(value: Any) -> str:
    """``dumps(readable_data(value))``, walking ``value`` once in the usual case: when no string
    in it holds a surrogate escape, its JSON text (written with ``ensure_ascii=False``, so such a
    character would appear in it as itself) holds none either, and readable_data would change
    nothing; only then is the text the answer. The store writes every measurement this way."""
    text = dumps(value)
    return dumps(readable_data(value)) if has_surrogates(text) else text
