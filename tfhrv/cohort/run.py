"""Many recordings at once: dask execution, resume, the study table and group comparison.

A cohort run reads a manifest, runs the single-record pipeline (read, clean, scan, circadian,
optionally the report) on every recording in parallel on a ``dask.distributed`` cluster,
and writes under ``OUTDIR``:

=========================== ==================================================================
``records/<record>.nc``     one DataTree per record (``/nn /short /long /record /circadian``),
                            written atomically; root attributes ``source_sha256`` and
                            ``parameter_hash`` make a rerun skip it when nothing changed
                            (``<record>`` is the record id when it is a short plain name,
                            else a safe stem plus a hash: :func:`tfhrv.core.files.safe_file_stem`)
``.checksums/<record>.json`` SHA-256 of the record's outputs, written with them
``reports/<record>.html``   the report of each record (only with ``report=True``)
``study.parquet``/``.csv``  one row per record: manifest columns, quality, verdict,
                            whole-record exponents with intervals, day/night values and
                            differences, cosinor parameters (see :func:`study_row`)
``comparison.csv``          every numeric column between every pair of groups: medians,
                            Mann-Whitney U p-value, Cliff's delta with a bootstrap interval,
                            Benjamini-Hochberg adjusted p (see :func:`compare_groups`)
``comparison.png``          key variables by group with the adjusted p
``short_exponents.zarr``    short-tier ``alpha1`` and ``exponent`` of every record on a
                            5-min time-of-day axis (records x time_of_day)
``failures.csv``            record, path, stage, error of every record that failed
=========================== ==================================================================

Manifest
--------
A CSV file with a header.  Columns (names are case-sensitive):

- ``path`` (required): the recording file, relative to the manifest's folder or absolute;
- ``record``: record identifier, unique, any text (default: the file stem);
- ``group``: study group (default: empty);
- ``start`` or ``start_time_of_day``: clock start, an ISO 8601 timestamp or ``HH:MM[:SS]``
  (default: the file's own, if any);
- ``sleep_log``: a sleep-log CSV (``record,rest_start,rest_end``) for day/night;
- ``tz``: IANA time zone of the record's naive clock times (e.g. ``Europe/Berlin``);
- any other column is carried through to the study table (numbers stay numbers).

Instead of a manifest, a folder or a glob pattern of recording files can be given (record
id = file stem, no group).  Every bad row (missing ``path`` column, a column named twice,
more fields than the header, empty path, missing file, duplicate record id, bad start,
unknown time zone, missing or unreadable sleep log, no rest period for the record) is
reported with its line before any work starts.  ``docs/manifest_example.csv`` is an example.

Resume: a record is skipped when its ``.nc`` (and report) match the SHA-256 stored in
``.checksums`` when they were written (a damaged file of the same size is redone), its
root attributes carry the input file's current SHA-256 and the same parameter hash
(SHA-256 of the JSON of every option, the record's start, time zone, sleep log and the
tfhrv version); its study row is then read from the root attribute
``cohort_summary`` (JSON) instead of the whole file.  Output files are only ever renamed
into place, so a killed run leaves no partial output; leftover ``*.part`` files are
removed on start, and a lock file keeps two runs out of the same ``OUTDIR``.  Failures
are tried again on every run.  Stages named in ``failures.csv``: read, clean, scan,
circadian, write, report, and worker (the worker process died, e.g. out of memory).
"""

from __future__ import annotations

import csv
import glob
import hashlib
import json
import os
import shutil
import sys
import time
import warnings
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from tfhrv.analysis.pipeline import EXPONENTS, ScanOptions
from tfhrv.circadian.days import (
    VARIABLES,
    CircadianOptions,
    circadian_dataset,
    circadian_table,
    read_sleep_log,
    sleep_log_records,
)
from tfhrv.cohort.outputs import (
    BIN_MINUTES,
    NOT_COMPARED,
    benjamini_hochberg,
    cliffs_delta,
    cliffs_delta_ci,
    compare_groups,
    compared_columns,
    group_labels,
    short_exponents_dataset,
    write_zarr,
)
from tfhrv.core.errors import RecordFormatError
from tfhrv.core.files import OutputError, OutputSet, safe_file_stem, short_text
from tfhrv.core.progress import SILENT, Progress, TextProgress
from tfhrv.dataset.build import scan
from tfhrv.dataset.netcdf import file_sha256, netcdf_bytes, write_bytes
from tfhrv.io.readers import parse_start, read_recording
from tfhrv.signal.clean import CleanOptions, clean
from tfhrv.signal.clock import load_zone
from tfhrv.viz.comparison import plot_comparison

__all__ = [
    "CohortOptions",
    "CohortResult",
    "ManifestEntry",
    "ManifestError",
    "NOT_COMPARED",
    "benjamini_hochberg",
    "cliffs_delta",
    "cliffs_delta_ci",
    "compare_groups",
    "compared_columns",
    "format_summary",
    "parameter_hash",
    "process_record",
    "read_manifest",
    "run_cohort",
    "short_exponents_dataset",
    "study_row",
    "with_sleep_log",
]

STAGES = ("read", "clean", "scan", "circadian", "write", "report", "worker")
RECORDING_SUFFIXES = (".csv", ".csv.gz", ".txt", ".txt.gz", ".tsv", ".tsv.gz", ".rr",
                      ".rr.gz", ".edf")
QUALITY = ("coverage", "ectopic_fraction", "longest_gap_s", "nn_mean_ms", "nn_sd_ms", "rmssd_ms",
           "recorded_h")
_SUMMARY_ATTR = "cohort_summary"


# ------------------------------------------------------------------------------ manifest


class ManifestError(RecordFormatError):
    """Bad manifest rows; ``problems`` lists every ``(line, problem)``, the first is raised."""

    def __init__(self, path: str, problems: Sequence[tuple[int, str]]) -> None:
        self.problems = tuple(problems)
        line, first = self.problems[0]
        more = "".join(f"; line {ln}: {p}" for ln, p in self.problems[1:])
        super().__init__(path, first + more, line=line)


@dataclass(frozen=True, slots=True)
class ManifestEntry:
    """One recording of a cohort.

    ``path`` is absolute; ``path_text`` as written in the manifest; ``extra`` the other
    manifest columns as ``(name, text)`` pairs; ``line`` the manifest line (0 for folder
    or glob input).
    """

    record: str
    path: Path
    group: str = ""
    start: str | None = None
    sleep_log: Path | None = None
    extra: tuple[tuple[str, str], ...] = ()
    line: int = 0
    path_text: str = ""
    tz: str | None = None

    @property
    def stem(self) -> str:
        """File-name stem of the record's outputs (safe for any record id)."""
        return safe_file_stem(self.record)


def _bad_record_id(rid: str) -> str | None:
    """Any non-empty id is accepted: output names go through
    :func:`tfhrv.core.files.safe_file_stem`."""
    if not rid:
        return "empty record id"
    if any(ord(c) < 32 or c == "\x7f" for c in rid):
        return f"record id {short_text(rid)} holds control characters"
    return None


def _stem(name: str) -> str:
    for suffix in (".gz", ".csv", ".tsv", ".txt", ".rr", ".edf"):
        name = name.removesuffix(suffix)
    return name


def read_manifest(source: str | Path, /) -> tuple[ManifestEntry, ...]:
    """Read a manifest CSV, or list the recordings of a folder or glob pattern.

    Parameters
    ----------
    source : str or Path
        A manifest CSV file (format in the module docstring), a folder (its files ending
        in one of :data:`RECORDING_SUFFIXES`) or a glob pattern such as ``"data/*.csv.gz"``.

    Returns
    -------
    tuple of ManifestEntry
        In manifest (or sorted file name) order.

    Raises
    ------
    ManifestError
        Naming the manifest file and the line of every bad row.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.csv").write_text("rr_ms\\n800\\n")
    >>> _ = (d / "m.csv").write_text("path,record,group,age\\na.csv,s1,control,41\\n")
    >>> e = read_manifest(d / "m.csv")[0]
    >>> e.record, e.group, e.extra, e.path == d / "a.csv"
    ('s1', 'control', (('age', '41'),), True)
    >>> _ = (d / "bad.csv").write_text("path,record\\na.csv,s1\\nb.csv,s1\\n")
    >>> read_manifest(d / "bad.csv")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tfhrv.cohort.run.ManifestError: .../bad.csv, line 3: no such file 'b.csv'; line 3: duplicate...
    """
    src = Path(source)
    if src.is_dir() or (not src.exists() and glob.has_magic(str(source))):
        files = (sorted(p for p in src.iterdir() if p.is_file()
                        and p.name.lower().endswith(RECORDING_SUFFIXES))
                 if src.is_dir() else sorted(Path(p) for p in glob.glob(str(source))
                                             if Path(p).is_file()))
        if not files:
            raise RecordFormatError(str(source), "no recording files found")
        entries, seen = [], {}
        for p in files:
            rid = _stem(p.name)
            if rid in seen:
                raise RecordFormatError(str(source), f"files {seen[rid].name!r} and "
                                        f"{p.name!r} give the same record id {rid!r}")
            seen[rid] = p
            entries.append(ManifestEntry(rid, p.resolve(), path_text=p.name))
        return tuple(entries)
    if not src.is_file():
        raise RecordFormatError(str(src), "no such manifest file or folder")
    return _read_manifest_csv(src)


def _read_manifest_csv(src: Path) -> tuple[ManifestEntry, ...]:
    try:
        return _read_manifest_rows(src)
    except UnicodeDecodeError:
        raise RecordFormatError(str(src), "is not a UTF-8 text (CSV) manifest") from None
    except csv.Error as exc:
        raise RecordFormatError(str(src), f"is not a readable CSV manifest ({exc})") from None


def _read_manifest_rows(src: Path) -> tuple[ManifestEntry, ...]:
    name, base = str(src), src.resolve().parent
    if b"\x00" in src.read_bytes()[:65536]:
        raise RecordFormatError(name, "holds binary data (NUL bytes), not a CSV manifest")
    with src.open(newline="", encoding="utf-8-sig") as fh:
        reader = csv.DictReader(fh)
        header = [h.strip() for h in (reader.fieldnames or [])]
        if "path" not in header:
            raise ManifestError(name, [(1, f"manifest has no 'path' column (columns: {header})")])
        reader.fieldnames = header
        problems: list[tuple[int, str]] = []
        entries: list[ManifestEntry] = []
        first_line: dict[str, int] = {}
        own = {"path", "record", "group", "start", "start_time_of_day", "sleep_log", "tz"}
        if len(set(header)) != len(header):
            raise ManifestError(name, [(1, "a column name appears twice in the header")])
        stems: dict[str, str] = {}
        for row in reader:
            line = reader.line_num
            if None in row:  # DictReader's key for fields beyond the header
                problems.append((line, f"{len(header) + len(row[None])} fields but the header "
                                 f"has {len(header)}"))
                continue
            cells = {k: (v or "").strip() for k, v in row.items() if k is not None}
            if not any(cells.values()):
                continue
            bad = len(problems)
            text = cells.get("path", "")
            path = (base / text).resolve() if text else None
            if not text:
                problems.append((line, "empty path"))
            elif not path.is_file():
                problems.append((line, f"no such file {text!r}"))
            rid = cells.get("record", "") or _stem(Path(text).name)
            if (why := _bad_record_id(rid)) is not None:
                problems.append((line, why))
            elif rid in first_line:
                problems.append((line, f"duplicate record id {rid!r} (first on line "
                                 f"{first_line[rid]})"))
            else:
                first_line[rid] = line
                stem = safe_file_stem(rid)
                if stem.lower() in stems:
                    problems.append((line, f"record ids {short_text(stems[stem.lower()])} and "
                                     f"{short_text(rid)} give the same output file name"))
                stems[stem.lower()] = rid
            starts = [cells[c] for c in ("start", "start_time_of_day") if cells.get(c)]
            if len(starts) > 1:
                problems.append((line, "both start and start_time_of_day are given"))
            elif starts:
                try:
                    parse_start(starts[0])
                except ValueError as exc:
                    problems.append((line, str(exc)))
            zone = cells.get("tz", "") or None
            if zone is not None:
                try:
                    load_zone(zone)
                except ValueError as exc:
                    problems.append((line, str(exc)))
            log = cells.get("sleep_log", "")
            log_path = (base / log).resolve() if log else None
            if log and not log_path.is_file():
                problems.append((line, f"no such sleep-log file {short_text(log)}"))
            elif log:  # its content, before any work starts
                try:
                    read_sleep_log(log_path, rid)
                except RecordFormatError as exc:
                    problems.append((line, f"sleep log: {exc}"))
            if len(problems) == bad:
                extra = tuple((k, v) for k, v in cells.items() if k not in own)
                entries.append(ManifestEntry(
                    rid, path, cells.get("group", ""), starts[0] if starts else None,
                    log_path, extra, line, text, zone))
    if problems:
        raise ManifestError(name, problems)
    if not entries:
        raise ManifestError(name, [(1, "manifest has no rows")])
    return tuple(entries)


def with_sleep_log(entries: Sequence[ManifestEntry], path: str | Path, /
                   ) -> tuple[ManifestEntry, ...]:
    """Give a study-wide sleep log to every record that has rows in it and no log of its own.

    Parameters
    ----------
    entries : sequence of ManifestEntry
    path : str or Path
        Sleep-log CSV with columns ``record``, ``rest_start``, ``rest_end`` (see
        :func:`tfhrv.circadian.days.read_sleep_log`); a manifest's own ``sleep_log`` column
        takes precedence.  Records without rows keep the clock windows (or the inferred rest
        period).

    Raises
    ------
    RecordFormatError
        When the file is missing or lacks a column.
    """
    from dataclasses import replace

    log = Path(path)
    ids = sleep_log_records(log)
    return tuple(replace(e, sleep_log=log.resolve()) if e.sleep_log is None and e.record in ids
                 else e for e in entries)


# ------------------------------------------------------------------------ one record


@dataclass(frozen=True, slots=True)
class CohortOptions:
    """Every option of a cohort run; all of it enters the parameter hash but ``report``.

    ``n_boot`` and ``seed`` drive the bootstrap interval of Cliff's delta in
    ``comparison.csv``.
    """

    clean: CleanOptions = field(default_factory=CleanOptions)
    scan: ScanOptions = field(default_factory=ScanOptions)
    circadian: CircadianOptions = field(default_factory=CircadianOptions)
    report: bool = False
    n_boot: int = 1999
    seed: int = 20261202


def parameter_hash(options: CohortOptions, entry: ManifestEntry, /) -> str:
    """SHA-256 (hex) of the JSON of all options, the record's own inputs and the version.

    The record id, start and sleep-log content enter because they change the output, and so
    does each calibration table file; the group and extra columns do not (they are read
    from the manifest at every run).
    """
    from tfhrv import __version__
    from tfhrv.calibration.calibrate import table_sha256
    from tfhrv.calibration.multifractal import multifractal_table_sha256

    blob = {"tfhrv_version": __version__, "calibration_sha256": table_sha256(),
            "multifractal_sha256": multifractal_table_sha256(),
            "clean": asdict(options.clean),
            "scan": asdict(options.scan), "circadian": asdict(options.circadian),
            "record": entry.record, "start": entry.start, "tz": entry.tz,
            "sleep_log_sha256": file_sha256(entry.sleep_log) if entry.sleep_log else None}
    text = json.dumps(blob, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def process_record(entry: ManifestEntry, outdir: str | Path, /, *, options: CohortOptions,
                   param_hash: str) -> dict:
    """Run the whole pipeline on one record; never raises for a bad record.

    Returns
    -------
    dict
        ``record``, ``status`` ("done" or "failed"), ``stage`` and ``error`` (of a
        failure, else ""), ``seconds``, ``row`` (:func:`study_row`, or None) and
        ``profile`` (time-of-day bins of the short exponents, or None).  Warnings raised
        on the way are kept in the root attribute ``warnings`` of the file and the study
        column of that name.
    """
    t0 = time.perf_counter()
    out = Path(outdir) / "records" / f"{entry.stem}.nc"
    stage, caught, result = "read", [], None
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            rec = read_recording(entry.path, start=entry.start, record_id=entry.record,
                                 tz=entry.tz, max_span_s=options.clean.max_span_s)
            stage = "clean"
            cleaned = clean(rec, options=options.clean)
            stage = "scan"
            tree = scan(cleaned, options=options.scan)
            stage = "circadian"
            log = read_sleep_log(entry.sleep_log, entry.record) if entry.sleep_log else None
            table = circadian_table(tree, options=options.circadian, sleep_log=log)
            tree["/circadian"] = xr.DataTree(circadian_dataset(table, options.circadian, tree=tree,
                                                         sleep_log=log))
            tree.attrs["parameter_hash"] = param_hash
            tree.attrs["history"] = (tree.attrs.get("history", "")
                                     + "\ntfhrv circadian\ntfhrv cohort")
            tree.attrs["warnings"] = " | ".join(sorted(
                {f"{w.category.__name__}: {w.message}" for w in caught}))
            result = {"row": study_row(tree), "profile": _clock_profile(tree)}
            tree.attrs[_SUMMARY_ATTR] = _summary_json(result)
            stage = "write"
            with OutputSet() as staged:  # the file, its report and their checksums, or none
                data = netcdf_bytes(tree)
                staged.add(out, write_bytes(data))
                sums = {out.name: hashlib.sha256(data).hexdigest()}
                if options.report:
                    stage = "report"
                    from tfhrv.viz.report import build_report

                    html = build_report(tree, circadian_table=table).encode("utf-8")
                    report = Path(outdir) / "reports" / f"{entry.stem}.html"
                    staged.add(report, write_bytes(html))
                    sums[f"reports/{report.name}"] = hashlib.sha256(html).hexdigest()
                stage = "write"
                staged.add(_checksum_path(Path(outdir), entry),
                           write_bytes(json.dumps(sums, sort_keys=True).encode()))
    except Exception as exc:  # isolate every failure of one record (reported, not raised)
        return {"record": entry.record, "status": "failed", "stage": stage,
                "error": f"{type(exc).__name__}: {exc}", "seconds": time.perf_counter() - t0,
                **(result or {"row": None, "profile": None})}
    return {"record": entry.record, "status": "done", "stage": "", "error": "",
            "seconds": time.perf_counter() - t0, **result}


def _scalar(ds: xr.Dataset, name: str) -> float:
    return float(ds[name].values) if name in ds else float("nan")


def _circadian_names() -> dict[tuple[str, str], str]:
    count = {v: sum(1 for _, w in VARIABLES if w == v) for _, v in VARIABLES}
    return {(t, v): v if count[v] == 1 else f"{v}_{t}" for t, v in VARIABLES}


def study_row(tree: xr.DataTree, /) -> dict:
    """The study-table columns computed from one record's DataTree.

    Returns
    -------
    dict
        ``clock`` (timestamp / time-of-day / unknown); the quality summary (:data:`QUALITY`);
        ``verdict`` and ``recommended_estimator`` of the whole-record FFT-slope fitness;
        each whole-record exponent (``beta_spectral``, ``beta_wavelet``, ``alpha1``,
        ``alpha2``, ``alpha_long``) with ``<name>_ci_lower``/``_ci_upper`` (calibrated)
        and ``<name>_block_ci_lower``/``_upper`` (over 4-h blocks); the whole-record
        multifractal ``c1``, ``c2``, ``mf_width`` with ``_ci_lower``/``_ci_upper``,
        ``c2_slope``, ``c2_pvalue`` and ``mf_width_slope``;
        ``nonstationary_share``, ``level_effect`` with ``level_effect_ci_lower``/``_upper``
        (:func:`tfhrv.analysis.consequence.level_change_effect`);
        ``period_source`` and, per circadian variable (``exponent`` of both tiers is named
        ``exponent_short``/``exponent_long``), ``<v>_day``, ``<v>_night``,
        ``<v>_night_minus_day`` with ``_ci_lower``/``_ci_upper`` (block bootstrap),
        ``<v>_mesor``, ``<v>_amplitude``, ``<v>_acrophase_h`` (clock hour of the peak;
        NaN unless the acrophase is referred to the clock) and ``<v>_cosinor_p``;
        ``source_sha256`` and ``parameter_hash``.
    """
    rec = tree["/record"].to_dataset()
    row: dict = {"clock": tree.attrs.get("clock", "unknown")}
    for name in QUALITY:
        row[name] = _scalar(rec, name)
    row["verdict"] = str(rec.attrs.get("verdict", ""))
    row["recommended_estimator"] = (str(rec["verdict"].attrs.get("recommended_estimator", ""))
                                    if "verdict" in rec else "")
    for name in EXPONENTS:
        row[name] = _scalar(rec, name)
        ci = rec[name + "_ci"].values if name + "_ci" in rec else (np.nan, np.nan)
        row[name + "_ci_lower"], row[name + "_ci_upper"] = float(ci[0]), float(ci[1])
        row[name + "_slope"] = _scalar(rec, name + "_slope")
        bci = rec[name + "_block_ci"].values if name + "_block_ci" in rec else (np.nan,) * 2
        row[name + "_block_ci_lower"], row[name + "_block_ci_upper"] = (float(bci[0]),
                                                                        float(bci[1]))
    for name in ("c1", "c2", "mf_width"):  # multifractal (tfhrv.analysis.multifractal_fits)
        row[name] = _scalar(rec, name)
        ci = rec[name + "_ci"].values if name + "_ci" in rec else (np.nan, np.nan)
        row[name + "_ci_lower"], row[name + "_ci_upper"] = float(ci[0]), float(ci[1])
    for name in ("c2_slope", "c2_pvalue", "mf_width_slope"):
        row[name] = _scalar(rec, name)
    row["nonstationary_share"] = _scalar(rec, "nonstationary_share")
    row["level_effect"] = _scalar(rec, "level_effect")
    lci = rec["level_effect_ci"].values if "level_effect_ci" in rec else (np.nan,) * 2
    row["level_effect_ci_lower"], row["level_effect_ci_upper"] = float(lci[0]), float(lci[1])
    table = (tree["/circadian"].to_dataset().to_dataframe() if "circadian" in tree.children
             else pd.DataFrame(columns=["tier", "variable", "day"]))
    pooled = table[table["day"].astype(str) == "all"]
    row["period_source"] = str(pooled["period_source"].iloc[0]) if len(pooled) else ""
    for (tier, var), name in _circadian_names().items():
        sel = pooled[(pooled["tier"] == tier) & (pooled["variable"] == var)]
        r = sel.iloc[0] if len(sel) else pd.Series(dtype=float)
        get = lambda k, r=r: float(r[k]) if k in r.index else float("nan")  # noqa: E731
        clock = len(sel) and str(r.get("acrophase_reference", "")) == "clock"
        row.update({
            f"{name}_day": get("day_mean"), f"{name}_night": get("night_mean"),
            f"{name}_night_minus_day": get("difference"),
            f"{name}_night_minus_day_ci_lower": get("difference_low"),
            f"{name}_night_minus_day_ci_upper": get("difference_high"),
            f"{name}_mesor": get("mesor"), f"{name}_amplitude": get("amplitude"),
            f"{name}_acrophase_h": get("acrophase_h") if clock else float("nan"),
            f"{name}_cosinor_p": get("cosinor_p"),
        })
    row["warnings"] = str(tree.attrs.get("warnings", ""))
    row["source_sha256"] = str(tree.attrs.get("source_sha256", ""))
    row["parameter_hash"] = str(tree.attrs.get("parameter_hash", ""))
    return row


def _clock_profile(tree: xr.DataTree) -> dict | None:
    """Mean short-tier alpha1 and exponent per 5-min bin of the clock (None without clock)."""
    short = tree["/short"].to_dataset()
    if "clock_hour" not in short.coords:
        return None
    n_bins = 24 * 60 // BIN_MINUTES
    idx = np.floor(short["clock_hour"].values * 60 / BIN_MINUTES).astype(int) % n_bins
    out = {}
    for var in ("alpha1", "exponent"):
        y = short[var].values
        ok = np.isfinite(y)
        sums = np.bincount(idx[ok], weights=y[ok], minlength=n_bins)
        counts = np.bincount(idx[ok], minlength=n_bins)
        with np.errstate(invalid="ignore", divide="ignore"):
            out[var] = np.where(counts > 0, sums / np.maximum(counts, 1), np.nan)
        out[var + "_n"] = counts.astype(np.int32)
    return out


def _summary_json(summary: dict) -> str:
    prof = summary["profile"]
    return json.dumps({"row": summary["row"], "profile": None if prof is None else
                       {k: v.tolist() for k, v in prof.items()}}, allow_nan=True)


def _cached_summary(outdir: Path, entry: ManifestEntry, param_hash: str, report: bool
                    ) -> dict | None:
    """The stored study row and profile when the record's output is up to date, else None.

    Up to date: the file opens, its ``parameter_hash`` and ``source_sha256`` match, and
    the report exists when one is asked for.  Only the root attributes are read (the row
    was computed by :func:`study_row` before the file was written), so resuming a large
    cohort costs little.
    """
    import h5netcdf

    nc = outdir / "records" / f"{entry.stem}.nc"
    html = outdir / "reports" / f"{entry.stem}.html"
    if not nc.is_file() or (report and not html.is_file()):
        return None
    # the content hashes stored when the files were written (a damaged file of the same
    # size, or one written by another program, is redone)
    try:
        sums = json.loads(_checksum_path(outdir, entry).read_text(encoding="utf-8"))
        if sums.get(nc.name) != file_sha256(nc) or (
                report and sums.get(f"reports/{html.name}") != file_sha256(html)):
            return None
    except (OSError, ValueError, AttributeError):
        return None
    try:
        with h5netcdf.File(nc, "r") as f:
            attrs = {k: f.attrs[k] for k in ("parameter_hash", "source_sha256", _SUMMARY_ATTR)
                     if k in f.attrs}
    except (OSError, ValueError):
        return None  # unreadable: redo it (the new file replaces it atomically)
    if (str(attrs.get("parameter_hash", "")) != param_hash or _SUMMARY_ATTR not in attrs
            or str(attrs.get("source_sha256", "")) != file_sha256(entry.path)):
        return None
    summary = json.loads(str(attrs[_SUMMARY_ATTR]))
    prof = summary["profile"]
    if prof is not None:
        summary["profile"] = {k: np.asarray(v, dtype=np.int32 if k.endswith("_n")
                                            else np.float64) for k, v in prof.items()}
    return summary


# ------------------------------------------------------------------------ the run


@dataclass(frozen=True, slots=True)
class CohortResult:
    """What :func:`run_cohort` did.

    ``records`` has one dict per record (``record``, ``status``: "done" this run, "skipped"
    (up to date) or "failed", ``stage``, ``error``, ``seconds``, ``pid``,
    ``peak_rss_mb`` of the process that ran it); ``study``, ``comparison`` and
    ``failures`` are the tables written to ``outdir``.
    """

    outdir: Path
    records: tuple[dict, ...]
    study: pd.DataFrame
    comparison: pd.DataFrame
    failures: pd.DataFrame
    elapsed_s: float

    def count(self, status: str) -> int:
        """Number of records with this status."""
        return sum(1 for r in self.records if r["status"] == status)


def _peak_rss_mb() -> float:
    try:
        import resource
    except ImportError:  # pragma: no cover - not POSIX
        return float("nan")
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # KiB on Linux


def _run_one(entry: ManifestEntry, outdir: str, options: CohortOptions, param_hash: str
             ) -> dict:
    res = process_record(entry, outdir, options=options, param_hash=param_hash)
    res.update(pid=os.getpid(), peak_rss_mb=_peak_rss_mb())
    return res


def _checksum_path(outdir: Path, entry: ManifestEntry) -> Path:
    """SHA-256 of a record's outputs, written with them and checked before a skip."""
    return outdir / ".checksums" / f"{entry.stem}.json"


def _clean_partials(outdir: Path) -> int:
    n = 0
    for folder in (outdir, outdir / "records", outdir / "reports", outdir / ".checksums"):
        for p in folder.glob("*.part") if folder.is_dir() else ():
            shutil.rmtree(p) if p.is_dir() else p.unlink(missing_ok=True)
            n += 1
    return n


class _Lock:
    """An exclusive lock on OUTDIR (released by the kernel if the process dies)."""

    def __init__(self, outdir: Path) -> None:
        self.path, self.fh = outdir / ".cohort.lock", None

    def __enter__(self):
        try:
            import fcntl
        except ImportError:  # pragma: no cover - not POSIX: no lock
            return self
        self.fh = self.path.open("w")
        try:
            fcntl.flock(self.fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            self.fh.close()
            raise ValueError(f"{self.path.parent}: another tfhrv cohort run is writing "
                             "there") from None
        return self

    def __exit__(self, *exc) -> None:
        if self.fh is not None:
            self.fh.close()


def _reporter(progress: bool | Progress) -> Progress:
    if isinstance(progress, Progress):
        return progress
    return TextProgress(sys.stderr, prefix="tfhrv cohort") if progress else SILENT


def _progress_line(results: dict, total: int, n_skipped: int, t0: float, res: dict) -> str:
    done = sum(1 for r in results.values() if r["status"] in ("done", "skipped"))
    failed = sum(1 for r in results.values() if r["status"] == "failed")
    el = int(time.perf_counter() - t0)
    what = (f"{res['record']} done in {res['seconds']:.1f} s" if res["status"] == "done" else
            f"{res['record']} FAILED at {res['stage']}: {res['error'][:120]}")
    skip = f" ({n_skipped} of them up to date)" if n_skipped else ""
    return (f"{done} done{skip}, {failed} failed, {total - len(results)} "
            "remaining, "
            f"{el // 3600}:{el // 60 % 60:02d}:{el % 60:02d} elapsed | {what}")


def _dask_bar(futures: list, client, reporter: Progress):
    """Drive ``reporter`` from dask's own progress feed (the scheduler's count of finished
    tasks, as ``distributed``'s text progress bar reads it), in a background thread.

    Returns the thread, or None when the feed cannot be started; a failure of the feed
    never touches the run (the per-record lines still come from ``as_completed``).
    """
    import threading

    try:
        from distributed.diagnostics.progressbar import TextProgressBar
    except ImportError:  # pragma: no cover - distributed without diagnostics
        return None

    class _Feed(TextProgressBar):
        def _draw_bar(self, remaining, all, **kwargs):  # noqa: A002 - dask's argument name
            reporter.update(all - remaining, all)

        def _draw_stop(self, **kwargs):
            pass

    def run() -> None:
        try:
            _Feed(futures, scheduler=client.scheduler.address, interval="200ms", start=True)
        except Exception:  # noqa: BLE001 - progress is never fatal
            pass

    thread = threading.Thread(target=run, name="tfhrv-dask-progress", daemon=True)
    thread.start()
    return thread


def _execute(todo: list[tuple[ManifestEntry, str]], outdir: Path, options: CohortOptions,
             results: dict, *, workers: int | None, scheduler: str | None, report,
             reporter: Progress = SILENT) -> None:
    """Run the records to do, in process or on dask, into ``results``; ``report`` each.

    On dask, an interactive ``reporter`` is also driven by dask's own progress feed
    (:func:`_dask_bar`)."""
    if not todo:
        return
    if scheduler == "sequential" or (scheduler is None and workers == 0):
        for entry, h in todo:
            results[entry.record] = _run_one(entry, str(outdir), options, h)
            report(results[entry.record])
        return
    import logging

    from distributed import Client, LocalCluster, as_completed

    cluster = None
    if scheduler is None:
        n = min(workers or os.cpu_count() or 1, len(todo))
        # no dashboard, and the scheduler's small HTTP server on a free local port: with
        # the default it tried port 8787 and warned when another program held it
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                               dashboard_address=None, silence_logs=logging.ERROR,
                               scheduler_kwargs={"dashboard": False,
                                                 "dashboard_address": "127.0.0.1:0"},
                               env={"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1",
                                    "MKL_NUM_THREADS": "1"})
    client = Client(cluster if cluster is not None else scheduler)
    try:
        futures = {client.submit(_run_one, entry, str(outdir), options, h,
                                 key=f"tfhrv-cohort-{entry.record}-{h[:16]}"): entry
                   for entry, h in todo}
        feed = (_dask_bar(list(futures), client, reporter)
                if getattr(reporter, "interactive", False) else None)
        for fut in as_completed(futures):
            entry = futures[fut]
            try:
                res = fut.result()
            except Exception as exc:  # the worker died (memory, kill): record it and go on
                res = {"record": entry.record, "status": "failed", "stage": "worker",
                       "error": f"{type(exc).__name__}: {exc}", "seconds": float("nan"),
                       "row": None, "profile": None, "pid": -1, "peak_rss_mb": float("nan")}
            fut.release()
            results[entry.record] = res
            report(res)
        if feed is not None:
            feed.join(timeout=2.0)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _typed_extras(entries: Sequence[ManifestEntry]) -> dict[str, list]:
    cols: dict[str, list] = {}
    for e in entries:
        for k, _ in e.extra:
            cols.setdefault(k, [])
    for k in cols:
        texts = [dict(e.extra).get(k, "") for e in entries]
        try:
            cols[k] = [float(t) if t else np.nan for t in texts]
        except ValueError:
            cols[k] = texts
    return cols


def _study_table(entries: Sequence[ManifestEntry], results: dict) -> pd.DataFrame:
    extras = _typed_extras(entries)
    rows = []
    for i, e in enumerate(entries):
        res = results[e.record]
        base = {"record": e.record, "group": e.group, **{k: v[i] for k, v in extras.items()},
                "path": e.path_text or str(e.path),
                "status": "ok" if res.get("row") is not None else f"failed ({res['stage']})"}
        rows.append({**base, **(res.get("row") or {})})
    return pd.DataFrame(rows)


def run_cohort(manifest: str | Path | Sequence[ManifestEntry], outdir: str | Path, /, *,
               workers: int | None = None, scheduler: str | None = None,
               options: CohortOptions | None = None, progress: bool = True) -> CohortResult:
    """Run the pipeline on every record of a manifest and write the study outputs.

    Parameters
    ----------
    manifest : str, Path or sequence of ManifestEntry
        Manifest CSV, folder or glob pattern (see :func:`read_manifest`).
    outdir : str or Path
        Output folder (created).  With a remote scheduler it must be on a file system the
        workers share, as must the recordings.
    workers : int, optional
        Worker processes of the local cluster (default: CPU count, at most the number of
        records to do); 0 runs in this process without dask.
    scheduler : str, optional
        ``"tcp://host:port"`` of a running ``dask.distributed`` scheduler (its workers
        should run with ``OPENBLAS_NUM_THREADS=1``), or ``"sequential"`` (in process).
    options : CohortOptions, optional
    progress : bool or tfhrv.core.progress.Progress, default True
        Where to report: True writes to stderr (a bar over the records that redraws in
        place on a terminal, with a line per failed record; elsewhere a line per finished
        record), False nothing, or a :class:`~tfhrv.core.progress.Progress` of your own.
        On dask the bar advances as ``distributed.as_completed`` hands back each record.

    Returns
    -------
    CohortResult

    Raises
    ------
    ManifestError, RecordFormatError
        For a bad manifest, before any work starts.
    ValueError
        For bad options, or when another run holds ``outdir``.

    Notes
    -----
    Each record runs :func:`process_record` as one dask task (``client.submit`` and
    ``as_completed``), on a ``LocalCluster(n_workers, threads_per_worker=1,
    processes=True)`` by default.  A failing record lands in ``failures.csv`` and does not
    stop the run.  Records whose output is up to date (:func:`parameter_hash` and input
    SHA-256) are not run again; their study rows are read from their files.
    """
    t0 = time.perf_counter()
    opt = options if options is not None else CohortOptions()
    if not isinstance(opt, CohortOptions):
        raise TypeError(f"options must be CohortOptions, got {type(opt).__name__}")
    if workers is not None and (not isinstance(workers, int) or workers < 0):
        raise ValueError(f"workers must be an integer >= 0, got {workers!r}")
    if scheduler is not None and scheduler != "sequential" and "://" not in scheduler:
        raise ValueError(f"scheduler must be 'sequential' or an address such as "
                         f"tcp://host:8786, got {scheduler!r}")
    if opt.report:
        import importlib.util

        if importlib.util.find_spec("tfhrv.viz.report") is None:
            raise ValueError("report=True needs tfhrv.viz.report, which is not installed")
    entries = (tuple(manifest) if not isinstance(manifest, str | Path)
               else read_manifest(manifest))
    out = Path(outdir).resolve()
    if out.exists() and not out.is_dir():
        raise ValueError(f"{out}: output exists and is not a folder")
    (out / "records").mkdir(parents=True, exist_ok=True)
    reporter = _reporter(progress)
    say = reporter.note
    with _Lock(out):
        if (n := _clean_partials(out)):
            say(f"removed {n} partial file(s) left by an interrupted run")
        results: dict[str, dict] = {}
        todo = []
        for e in entries:
            h = parameter_hash(opt, e)
            if (cached := _cached_summary(out, e, h, opt.report)) is not None:
                results[e.record] = {"record": e.record, "status": "skipped", "stage": "",
                                     "error": "", "seconds": 0.0, "pid": os.getpid(),
                                     "peak_rss_mb": float("nan"), **cached}
            else:
                todo.append((e, h))
        n_skip = len(results)
        say(f"{len(entries)} records, {n_skip} up to date, {len(todo)} to run")
        interactive = bool(getattr(reporter, "interactive", False))

        def one_done(r: dict) -> None:
            if r["status"] == "failed" or not interactive:
                say(_progress_line(results, len(entries), n_skip, t0, r))
            reporter.update(len(results) - n_skip, len(todo))

        if todo:
            reporter.start(len(todo), "records")
        try:
            _execute(todo, out, opt, results, workers=workers, scheduler=scheduler,
                     report=one_done, reporter=reporter)
        finally:
            if todo and interactive:
                reporter.finish()
        reporter.stage("study table, group comparison and time-of-day profiles")
        study = _study_table(entries, results)
        comparison = compare_groups(study[study["status"] == "ok"], n_boot=opt.n_boot,
                                    rng=opt.seed)
        fails = pd.DataFrame(
            [{"record": e.record, "path": e.path_text or str(e.path),
              "stage": results[e.record]["stage"], "error": results[e.record]["error"]}
             for e in entries if results[e.record]["status"] == "failed"],
            columns=["record", "path", "stage", "error"])
        ok = [e for e in entries if results[e.record].get("row") is not None]
        # the tables first, renamed together: on a full disk the study still says what
        # happened to every record; then the derived outputs, renamed together
        with OutputSet() as staged:
            staged.add(out / "failures.csv", lambda tmp: fails.to_csv(tmp, index=False))
            staged.add(out / "study.csv", lambda tmp: study.to_csv(tmp, index=False))
            staged.add(out / "comparison.csv",
                       lambda tmp: comparison.to_csv(tmp, index=False))
        derived = (out / "study.parquet", out / "comparison.png", out / "short_exponents.zarr")
        try:
            with OutputSet() as staged:
                staged.add(derived[0], lambda tmp: study.to_parquet(tmp, index=False))
                figure = plot_comparison(study, comparison, derived[1],
                                         groups=group_labels(study["group"]), outputs=staged)
                write_zarr(short_exponents_dataset(
                    [e.record for e in ok], [e.group for e in ok],
                    [results[e.record]["profile"] for e in ok]), derived[2], outputs=staged)
        except OSError as exc:
            for p in derived:  # no stale derived output beside the new tables
                shutil.rmtree(p, ignore_errors=True) if p.is_dir() else p.unlink(
                    missing_ok=True)
            raise OutputError(out, "study.csv, comparison.csv and failures.csv were written, "
                              f"but not study.parquet, comparison.png and the Zarr store: "
                              f"{exc}") from None
        if figure is None:
            (out / "comparison.png").unlink(missing_ok=True)  # no stale figure
    records = tuple({k: v for k, v in results[e.record].items() if k not in ("row", "profile")}
                    for e in entries)
    return CohortResult(out, records, study, comparison, fails, time.perf_counter() - t0)


def format_summary(result: CohortResult, /) -> str:
    """A few lines saying what a run did and where the outputs are."""
    r = result
    lines = [f"tfhrv cohort: {len(r.records)} records in {r.elapsed_s:.1f} s: "
             f"{r.count('done')} run, {r.count('skipped')} up to date, "
             f"{r.count('failed')} failed",
             f"  study table:  {r.outdir / 'study.parquet'} (and .csv)",
             f"  comparison:   {r.outdir / 'comparison.csv'}"
             + (" and comparison.png" if (r.outdir / "comparison.png").exists() else ""),
             f"  exponents by time of day: {r.outdir / 'short_exponents.zarr'}"]
    if r.count("failed"):
        lines.append(f"  failures:     {r.outdir / 'failures.csv'}")
    top = r.comparison.dropna(subset=["p_adjusted"]).sort_values("p_adjusted").head(5)
    for _, c in top.iterrows():
        lines.append(f"  {c['variable']}: {c['group_a']} {c['median_a']:.4g} vs {c['group_b']} "
                     f"{c['median_b']:.4g}, Cliff's delta {c['cliffs_delta']:+.2f}, "
                     f"adjusted p {c['p_adjusted']:.2g}")
    return "\n".join(lines)
