"""Export a study's data in an open layout: a Psych-DS-style dataset with a Frictionless package.

Layout written by :func:`export_dataset`::

    <out>/
      dataset_description.json       Psych-DS description (schema.org Dataset, variableMeasured)
      datapackage.json               Frictionless Data Package listing every CSV with its schema
      trials.schema.json             Frictionless Table Schema of the tidy trials table
      data/
        study-<name>_table-trials_data.csv                       every trial, tidy columns
        study-<name>_table-items_data.csv                        the bank's items and factors
        study-<name>_kind-human_respondent-P001_data.csv          one file per session
        study-<name>_kind-human_respondent-P001_data.json         the session's sidecar
        ...

File names follow the Psych-DS keyword-value convention (``key-value`` pairs joined by ``_``
and ending in ``_data.csv``); values keep only letters and digits (``strings-ref-s0`` becomes
``stringsrefs0``), the original ids stay in the CSV columns and sidecars.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from twofold.study._io import atomic_folder
from twofold.study.exceptions import InputError
from twofold.study.logs import read_sidecar, write_json_atomic

from .data import StudyData, item_table

__all__ = ["export_dataset", "trials_table_schema"]

_DESCRIPTIONS: dict[str, tuple[str, str]] = {
    "study": ("string", "study name"),
    "respondent": ("string", "respondent id (a code, never a name)"),
    "kind": ("string", "respondent kind: human or machine"),
    "group": ("string", "'human' for people, the solver name for machines"),
    "session": ("string", "session id"),
    "seed": ("integer", "machine session seed (empty for people)"),
    "synthetic": ("boolean", "true for simulated respondents"),
    "form": ("string", "form id"),
    "block": ("string", "block name"),
    "trial": ("integer", "0-based trial index within the session"),
    "item": ("string", "item id"),
    "family": ("string", "item family"),
    "mode": ("string", "response mode: generate or select"),
    "response": ("string", "the response as canonical JSON"),
    "correct": ("boolean", "whether the response is correct (empty when not scored)"),
    "error_type": ("string", "the family's error type of a wrong response"),
    "status": ("string", "trial outcome: ok, timeout, invalid or failed"),
    "rt_ms": ("number", "response time in ms from the item's onset (people)"),
    "effort": ("number", "machine effort in effort_unit"),
    "effort_unit": ("string", "unit of effort"),
    "variant_of": ("string", "parent item id of an isomorph"),
    "variant_operator": ("string", "variant operator that made an isomorph"),
    "parent": ("string", "root parent item id (the item's own id for parents)"),
    "isomorph": ("boolean", "true when the item is an isomorph"),
    "session_status": ("string", "session status from its sidecar"),
    "source": ("string", "log file the row came from"),
    "choice_order": (
        "string",
        "select mode, people: the bank's choice numbers in the order shown on screen "
        "(e.g. '3 1 4 2'); empty for generate mode, machines and logs written before it",
    ),
}
_ENUMS = {
    "kind": ["human", "machine"],
    "mode": ["generate", "select"],
    "status": ["ok", "timeout", "invalid", "failed"],
}
_REQUIRED = {"respondent", "kind", "group", "session", "item", "family", "status"}


def _frictionless_type(series: pd.Series) -> str:
    if pd.api.types.is_bool_dtype(series) or str(series.dtype) == "boolean":
        return "boolean"
    if pd.api.types.is_integer_dtype(series):
        return "integer"
    if pd.api.types.is_numeric_dtype(series):
        return "number"
    return "string"


def trials_table_schema(trials: pd.DataFrame) -> dict[str, Any]:
    """The Frictionless Table Schema of a tidy trials table (a JSON-ready dict).

    Base columns get fixed types and descriptions; ``factor_`` columns get the type of their
    values (``number`` or ``string``).
    """
    fields = []
    for col in trials.columns:
        if col in _DESCRIPTIONS:
            ftype, desc = _DESCRIPTIONS[col]
        else:
            ftype = _frictionless_type(trials[col])
            desc = (
                f"difficulty factor '{col.removeprefix('factor_')}' of the item"
                if col.startswith("factor_")
                else col
            )
        f: dict[str, Any] = {"name": col, "type": ftype, "description": desc}
        cons: dict[str, Any] = {}
        if col in _REQUIRED:
            cons["required"] = True
        if col in _ENUMS:
            cons["enum"] = _ENUMS[col]
        if cons:
            f["constraints"] = cons
        if ftype == "boolean":
            f["trueValues"] = ["true"]
            f["falseValues"] = ["false"]
        fields.append(f)
    return {"fields": fields, "missingValues": [""]}


def _csv_frame(df: pd.DataFrame, schema: dict[str, Any]) -> pd.DataFrame:
    """Every column as the text the table schema promises (missing values as empty cells).

    Vectorised per column: booleans ``true``/``false``, integers without a decimal point,
    numbers as the shortest text that reads back to the same float (``repr``), the rest as text.
    """
    out = pd.DataFrame(index=df.index)
    for f in schema["fields"]:
        col = f["name"]
        s = df[col]
        na = s.isna().to_numpy()
        text = np.full(len(s), "", dtype=object)
        ok = ~na
        if f["type"] == "boolean":
            text[ok] = np.where(s[ok].astype(bool).to_numpy(), "true", "false")
        elif f["type"] == "integer":
            text[ok] = s[ok].astype("int64").astype(str).to_numpy()
        elif f["type"] == "number":
            text[ok] = [repr(float(v)) for v in s[ok].to_numpy(dtype=float)]
        else:
            text[ok] = [str(v) for v in s[ok].to_numpy(dtype=object)]
        out[col] = text
    return out


def _write_csv(df: pd.DataFrame, schema: dict[str, Any], path: Path) -> None:
    _csv_frame(df, schema).to_csv(path, index=False, lineterminator="\n", encoding="utf-8")


_KEEP = re.compile(r"[^A-Za-z0-9]")


def _value(text: str) -> str:
    return _KEEP.sub("", str(text)) or "x"


def export_dataset(
    data: StudyData,
    out_dir: str | Path,
    *,
    logs_dir: str | Path | None = None,
    overwrite: bool = False,
    description: str | None = None,
) -> Path:
    """Write a study's data as a Psych-DS-style dataset with a Frictionless Data Package.

    Parameters
    ----------
    data : StudyData
        From :func:`twofold.analysis.load_study_data`.
    out_dir : path
        The dataset folder to create.
    logs_dir : path, optional
        The logs folder the sidecars are copied from (default: none copied unless given).
    overwrite : bool, default False
        Replace an existing folder.
    description : str, optional
        Free-text description for ``dataset_description.json``.

    Returns
    -------
    Path
        ``out_dir``.

    Notes
    -----
    The dataset validates with ``frictionless.validate(out_dir / "datapackage.json")``.

    References
    ----------
    Psych-DS technical specification (keyword-value file names, ``dataset_description.json``
    with schema.org ``Dataset`` metadata); Frictionless Data Table Schema and Data Package specs.
    """
    dest = Path(out_dir)
    if dest.exists() and not overwrite:
        raise InputError(
            f"{dest}: folder exists; accepted: a new folder, or pass overwrite=True.",
            where=str(dest),
            field="out_dir",
        )
    with atomic_folder(dest) as tmp:
        _write(data, tmp, logs_dir=logs_dir, description=description)
    return dest


def _write(
    data: StudyData, root: Path, *, logs_dir: str | Path | None, description: str | None
) -> None:
    name = _value(data.study)
    trials = data.trials
    (root / "data").mkdir()
    schema = trials_table_schema(trials)
    write_json_atomic(root / "trials.schema.json", schema)
    resources: list[dict[str, Any]] = []

    def add(
        df: pd.DataFrame, rel: str, sch: dict[str, Any], title: str, *, text: bool = False
    ) -> None:
        # ``text``: ``df`` is already the schema's text (see _csv_frame), so it is written as is
        if text:
            df.to_csv(root / rel, index=False, lineterminator="\n", encoding="utf-8")
        else:
            _write_csv(df, sch, root / rel)
        resources.append(
            {
                "name": re.sub(r"[^a-z0-9._-]", "-", Path(rel).stem.lower()),
                "path": rel,
                "profile": "tabular-data-resource",
                "format": "csv",
                "mediatype": "text/csv",
                "encoding": "utf-8",
                "title": title,
                "schema": sch,
            }
        )

    as_text = _csv_frame(trials, schema)  # converted once, sliced per session below
    add(as_text, f"data/study-{name}_table-trials_data.csv", schema, "every trial", text=True)
    items = item_table(data.bank)
    add(items, f"data/study-{name}_table-items_data.csv", trials_table_schema(items), "items")
    used: set[str] = set()
    groups = trials.groupby(["kind", "session"], sort=True).indices
    for (kind, session), rows in sorted(groups.items()):
        sub = trials.iloc[rows]
        val = _value(session)
        k = 2
        while (kind, val) in used:
            val = f"{_value(session)}{k}"
            k += 1
        used.add((kind, val))  # type: ignore[arg-type]
        stem = f"study-{name}_kind-{_value(kind)}_respondent-{val}_data"
        add(as_text.iloc[rows], f"data/{stem}.csv", schema, f"session {session}", text=True)
        src = sub["source"].iloc[0] if "source" in sub.columns else None
        if logs_dir is not None and src:
            side_path = Path(logs_dir) / Path(str(src)).with_suffix(".json")
            if side_path.exists():
                side = read_sidecar(side_path)
                side["data_file"] = f"{stem}.csv"
                # inside the export's temporary folder, which becomes the export atomically
                with open(root / "data" / f"{stem}.json", "w", encoding="utf-8") as fh:
                    json.dump(side, fh, indent=2, ensure_ascii=False, default=str)
                    fh.write("\n")
    variables = [
        {"@type": "PropertyValue", "name": f["name"], "description": f["description"]}
        for f in schema["fields"]
    ]
    write_json_atomic(
        root / "dataset_description.json",
        {
            "@context": "https://schema.org/",
            "@type": "Dataset",
            "name": f"twofold study {data.study}",
            "description": description
            or f"Trials of study {data.study}: people and machine solvers answering the same "
            f"items (bank hash {data.bank.hash}).",
            "schemaVersion": "Psych-DS 0.1.0",
            "variableMeasured": variables,
            "identifier": f"bank-sha256:{data.bank.hash}",
            "keywords": ["twofold", "human-machine comparison"],
        },
    )
    write_json_atomic(
        root / "datapackage.json",
        {
            "name": re.sub(r"[^a-z0-9._-]", "-", f"twofold-{data.study}".lower()),
            "title": f"twofold study {data.study}",
            "profile": "tabular-data-package",
            "resources": resources,
        },
    )
