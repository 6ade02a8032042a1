"""Lot files: many specimens of one lot, measured with one base job.

A lot file (TOML) has a ``[lot]`` table and one ``[[specimens]]`` table per specimen::

    [lot]
    id = "TB-40-L2607"
    description = "Training balls, 40 mm, lot of July 2026"
    job = "lot_base.toml"          # the base job: its sections apply to every specimen
    coverage = 0.95                # tolerance interval: proportion of the lot covered
    confidence = 0.95              # ... and the confidence level
    spread_method = "paule-mandel" # or "dersimonian-laird"

    [lot.throw_options]            # optional: options every footage throw takes
    scale = 0.0005                 # e.g. the footage calibration [m/px]

    [[specimens]]
    id = "TB-01"
    mass = "2.70 g"
    mass_uncertainty = "0.01 g"
    diameter = "40.00 mm"
    diameter_uncertainty = "0.05 mm"
    throws = ["tb01_throw1.csv", "tb01_throw2.csv"]
    air = { temperature = 22.5 }   # optional: keys of [air], [site], [camera] or [fit]
                                   # that differ for this specimen

The base job is a job file (see :mod:`fitdrag.run.job_file`) whose ``[laboratory]``,
``[test]``, ``[air]``, ``[site]``, ``[camera]``, ``[specification]``, ``[fit]``,
``[uncertainty]`` and ``[output]`` apply to every specimen; its ``[specimen]`` and
``[[throws]]``, if any, are replaced by each specimen's.  A specimen's keys are those of a job
file's ``[specimen]`` (``description`` defaults to the lot's) plus ``throws``: a list of
track CSV files (``.csv``) or footage (anything else), or of tables like a job file's
``[[throws]]``.  Paths in the lot file resolve against its folder, the base job's against
its own.  Each specimen becomes a :class:`fitdrag.run.job.Job`, checked exactly as a job file
is; an error names the lot file, the line, the specimen and the key.
"""

from __future__ import annotations

import copy
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fitdrag.errors import InputError, InputFileNotFoundError
from fitdrag.run.job import Job
from fitdrag.run.job_keys import SECTIONS, Where, key_lines

__all__ = ["LOT_KEYS", "OVERRIDABLE", "Lot", "LotSpecimen", "load_lot"]

#: Keys of the ``[lot]`` table.
LOT_KEYS = ("id", "description", "job", "coverage", "confidence", "spread_method",
            "throw_options")  # fmt: skip

#: Sections of the base job a specimen may override key by key.
OVERRIDABLE = ("air", "site", "camera", "fit")

#: The specimen's own keys: those of a job's [specimen], plus its throws.
SPECIMEN_KEYS = (*SECTIONS["specimen"], "throws")

_PATH_KEYS = ("track", "footage", "marker_layout", "lens")


@dataclass(frozen=True)
class LotSpecimen:
    """One specimen of a lot and its job (the base job with the specimen's keys).

    Attributes
    ----------
    id : str
        The specimen.
    job : Job
        The job that measures it.
    line : int or None
        Line of its ``[[specimens]]`` table in the lot file.
    """

    id: str
    job: Job
    line: int | None = None


@dataclass(frozen=True)
class Lot:
    """A parsed, validated lot file.

    Attributes
    ----------
    path : Path
        The lot file.
    text : str
        Its text.
    id, description : str
        The lot.
    base_job : Path
        The base job file.
    base_text : str
        Its text.
    specimens : tuple of LotSpecimen
        The specimens, in the file's order.
    coverage, confidence : float
        Of the lot's statistical tolerance interval. [-]
    spread_method : str
        Estimator of the between-specimen variance.
    """

    path: Path
    text: str
    id: str
    description: str
    base_job: Path
    base_text: str
    specimens: tuple[LotSpecimen, ...]
    coverage: float = 0.95
    confidence: float = 0.95
    spread_method: str = "paule-mandel"

    @property
    def first_job(self) -> Job:
        return self.specimens[0].job

    @property
    def specification(self):
        return self.first_job.specification

    @property
    def decision_rule(self) -> str | None:
        return self.first_job.decision_rule

    @property
    def output_directory(self) -> Path:
        return self.first_job.output_directory

    @property
    def records_path(self) -> Path:
        return self.first_job.records_path

    @property
    def number_prefix(self) -> str:
        return self.first_job.number_prefix


class _LotWhere(Where):
    """Error locations of one specimen's job: the lot file for the specimen's own keys, its
    throws and overrides; the base job for the rest."""

    def __init__(self, lot_path: Path, lot_text: str, base: Where, index: int, sid: str,
                 overrides: dict, n_throws: int) -> None:  # fmt: skip
        self.path = lot_path
        self.base = base
        self.lot_keys, self.lot_headers = key_lines(lot_text)
        self.index, self.sid, self.overrides = index, sid, overrides
        # every throw of the specimen is on its `throws` line
        throws_line = self.lot_keys.get(("specimens", index, "throws"))
        self.keys = {("throws", j, k): throws_line for j in range(n_throws)
                     for k in ("track", "footage")}  # fmt: skip
        self.headers = {("throws", j): throws_line for j in range(n_throws)}

    @property
    def _spec(self) -> str:
        return f"[[specimens]] #{self.index + 1} (id {self.sid!r})"

    def _loc(self, key: str | None) -> str:
        n = self.lot_keys.get(("specimens", self.index, key)) if key else None
        n = n or self.lot_headers.get(("specimens", self.index))
        return f"{self.path.name}, line {n}" if n else self.path.name

    def key(self, section: str, index: int | None, key: str) -> str:
        if section == "specimen":
            return f"{self._loc(key)}: {self._spec} {key}"
        if section == "throws":
            return f"{self._loc('throws')}: {self._spec} throws #{(index or 0) + 1} {key}"
        if key in self.overrides.get(section, {}):
            return f"{self._loc(section)}: {self._spec} {section}.{key}"
        return self.base.key(section, index, key)

    def section(self, section: str, index: int | None = None) -> str:
        if section == "specimen":
            return f"{self._loc(None)}: {self._spec}"
        if section == "throws":
            return f"{self._loc('throws')}: {self._spec} throws #{(index or 0) + 1}"
        if section in self.overrides:
            return f"{self._loc(section)}: {self._spec} {section}"
        return self.base.section(section, index)


def _read_toml(path: Path, what: str) -> tuple[str, dict]:
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give the path of a {what} (.toml).")
    if not path.exists():
        raise InputFileNotFoundError(f"{path}: no such {what}.")
    try:
        text = path.read_bytes().decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path.name}: not UTF-8 text ({exc}); save it as UTF-8.") from None
    try:
        return text, tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path.name}: not valid TOML: {exc}.") from None


def _fraction(where: str, name: str, raw: Any, default: float) -> float:
    if raw is None:
        return default
    if isinstance(raw, bool) or not isinstance(raw, int | float) or not 0.0 < raw < 1.0:
        raise InputError(
            f"{where} {name}: expected a fraction between 0 and 1, got {raw!r}; e.g. "
            f"{name} = {default}."
        )
    return float(raw)


def load_lot(path: str | Path, *, check_files: bool = True) -> Lot:
    """Read and validate a lot file and its base job; one :class:`Job` per specimen.

    Raises
    ------
    FileNotFoundError
        The lot file, its base job, or a file a specimen names does not exist.
    ValueError
        Anything wrong, naming the file, the line, the specimen and the key, with the fix.
    """
    from fitdrag.run.job_file import job_from_data
    from fitdrag.uncertainty.lot_statistics import METHODS

    path = Path(path)
    text, data = _read_toml(path, "lot file")
    path = path.resolve()
    folder = path.parent
    keys, headers = key_lines(text)

    def at(sec: str, idx, key: str | None = None) -> str:
        n = keys.get((sec, idx, key)) if key else None
        n = n or headers.get((sec, idx))
        return f"{path.name}, line {n}" if n else path.name

    unknown = sorted(set(data) - {"lot", "specimens"})
    if unknown:
        raise InputError(
            f"{at(unknown[0], None)}: {unknown[0]}: unknown section; a lot file has [lot] and "
            f"[[specimens]] tables."
        )
    lot = data.get("lot")
    if not isinstance(lot, dict):
        raise InputError(f"{path.name}: section [lot] is missing; give id, description and job.")
    for k in lot:
        if k not in LOT_KEYS:
            raise InputError(
                f"{at('lot', None, k)}: [lot] {k}: unknown key; valid keys are "
                f"{', '.join(LOT_KEYS)}."
            )
    for k in ("id", "job"):
        if not isinstance(lot.get(k), str) or not lot[k].strip():
            raise InputError(
                f"{at('lot', None, k)}: [lot] {k}: missing or not text; give "
                + ("the lot's identification." if k == "id" else "the base job file's path.")
            )
    method = lot.get("spread_method", "paule-mandel")
    if method not in METHODS:
        raise InputError(
            f"{at('lot', None, 'spread_method')}: [lot] spread_method: unknown value "
            f"{method!r}; use one of {', '.join(map(repr, METHODS))}."
        )
    coverage = _fraction(at("lot", None, "coverage") + ": [lot]", "coverage",
                         lot.get("coverage"), 0.95)  # fmt: skip
    confidence = _fraction(at("lot", None, "confidence") + ": [lot]", "confidence",
                           lot.get("confidence"), 0.95)  # fmt: skip
    throw_options = lot.get("throw_options", {})
    if not isinstance(throw_options, dict):
        raise InputError(
            f"{at('lot', None, 'throw_options')}: [lot] throw_options: expected a table of "
            f"throw options, e.g. [lot.throw_options] with scale = 0.0005."
        )
    base_path = Path(lot["job"]).expanduser()
    base_path = base_path if base_path.is_absolute() else folder / base_path
    if not base_path.exists():
        raise InputFileNotFoundError(
            f"{at('lot', None, 'job')}: [lot] job: no such file {str(base_path)!r}; paths are "
            f"relative to the lot file's folder {str(folder)!r}."
        )
    base_text, base_data = _read_toml(base_path, "base job file")
    base_path = base_path.resolve()
    base_where = Where(base_path, base_text)
    description = str(lot.get("description", "")).strip()

    items = data.get("specimens")
    if not isinstance(items, list) or not items:
        raise InputError(
            f"{path.name}: no [[specimens]]; add one [[specimens]] table per specimen with id, "
            f"mass, diameter and throws."
        )
    specimens = []
    seen: dict[str, int] = {}
    for i, sp in enumerate(items):
        loc = at("specimens", i)
        if not isinstance(sp, dict):
            raise InputError(f"{loc}: [[specimens]] #{i + 1}: expected a table.")
        sid = sp.get("id")
        if not isinstance(sid, str) or not sid.strip():
            raise InputError(
                f"{at('specimens', i, 'id')}: [[specimens]] #{i + 1} id: missing or not text; "
                f"give the specimen's identification (label, serial number)."
            )
        sid = sid.strip()
        name = f"[[specimens]] #{i + 1} (id {sid!r})"
        if sid in seen:
            raise InputError(
                f"{at('specimens', i, 'id')}: {name} id: already used by [[specimens]] "
                f"#{seen[sid] + 1}; give every specimen its own id."
            )
        seen[sid] = i
        own, overrides = {}, {}
        for k, v in sp.items():
            if k in OVERRIDABLE:
                if not isinstance(v, dict):
                    raise InputError(
                        f"{at('specimens', i, k)}: {name} {k}: expected a table of [{k}] keys "
                        f"that differ for this specimen, e.g. {k} = {{ ... }}."
                    )
                overrides[k] = v
            elif k in SPECIMEN_KEYS:
                own[k] = v
            else:
                raise InputError(
                    f"{at('specimens', i, k)}: {name} {k}: unknown key; valid keys are "
                    f"{', '.join(SPECIMEN_KEYS)} and the tables {', '.join(OVERRIDABLE)}."
                )
        throws = own.pop("throws", None)
        if not isinstance(throws, list) or not throws:
            raise InputError(
                f"{at('specimens', i, 'throws' if 'throws' in sp else None)}: {name} throws: "
                f"missing or empty; give a list of track or footage files, e.g. throws = "
                f'["{sid}_throw1.csv", "{sid}_throw2.csv"].'
            )
        tables = []
        for j, th in enumerate(throws):
            if isinstance(th, str):
                kind = "track" if th.lower().endswith(".csv") else "footage"
                th = {kind: th}
            elif not isinstance(th, dict):
                raise InputError(
                    f"{at('specimens', i, 'throws')}: {name} throws #{j + 1}: expected a file "
                    f"name or a table, got {th!r}."
                )
            if "footage" in th:
                th = {**throw_options, **th}
            for k in _PATH_KEYS:
                if isinstance(th.get(k), str):
                    p = Path(th[k]).expanduser()
                    p = p if p.is_absolute() else folder / p
                    if check_files and k in ("track", "footage") and not p.exists():
                        raise InputFileNotFoundError(
                            f"{at('specimens', i, 'throws')}: {name} throws #{j + 1} {k}: no "
                            f"such file {str(p)!r}; paths are relative to the lot file's folder "
                            f"{str(folder)!r}."
                        )
                    th[k] = str(p)
            th.setdefault("label", f"{sid} throw {j + 1}")
            tables.append(th)
        own.setdefault("description", description or f"specimen of lot {lot['id']}")
        job_data = copy.deepcopy(base_data)
        job_data.pop("specimen", None)
        job_data["specimen"] = own
        job_data["throws"] = tables
        for sec, table in overrides.items():
            base_sec = job_data.get(sec, {})
            job_data[sec] = {**(base_sec if isinstance(base_sec, dict) else {}), **table}
        where = _LotWhere(path, text, base_where, i, sid, overrides, len(tables))
        job = job_from_data(job_data, base_text, base_path, where, base_path.parent,
                            check_files)  # fmt: skip
        specimens.append(LotSpecimen(sid, job, headers.get(("specimens", i))))
    if len(specimens) < 2:
        raise InputError(
            f"{path.name}: a lot needs at least 2 specimens for its statistics, got 1; add "
            f"[[specimens]] tables."
        )
    return Lot(
        path=path,
        text=text,
        id=lot["id"].strip(),
        description=description,
        base_job=base_path,
        base_text=base_text,
        specimens=tuple(specimens),
        coverage=coverage,
        confidence=confidence,
        spread_method=method,
    )
