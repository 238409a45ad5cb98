"""CSV writer for synthetic recordings (re-exported by :mod:`tfhrv.synth.recordings`)."""

from __future__ import annotations

import gzip
import json
import os
import tempfile
from pathlib import Path
from typing import Any

__all__ = ["sidecar_path", "write_recording_csv"]


def sidecar_path(path: str | os.PathLike) -> Path:
    """Truth sidecar of a recording file: ``<stem>.truth.json`` beside it.

    The stem drops ``.csv.gz``, ``.csv`` or ``.gz``.

    Examples
    --------
    >>> sidecar_path("demo_data/sw01.csv.gz").name
    'sw01.truth.json'
    """
    p = Path(path)
    name = p.name
    for suffix in (".csv.gz", ".csv", ".gz"):
        if name.lower().endswith(suffix):
            name = name[: -len(suffix)]
            break
    return p.with_name(name + ".truth.json")


def _atomic_write(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; give the usual permissions of a data file
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_recording_csv(sim: Any, path: str | os.PathLike, *,
                        truth_sidecar: bool = True) -> Path:
    """Write a synthetic recording as a beat-interval CSV (gzip when ``path`` ends in .gz).

    Parameters
    ----------
    sim : SyntheticRecording
        The recording and its truth.
    path : str or os.PathLike
        Output file; ``.gz`` means gzip compression (byte-reproducible: no time stamp).
    truth_sidecar : bool, default True
        Also write the truth as JSON to :func:`sidecar_path` of ``path``.

    Returns
    -------
    pathlib.Path
        The CSV path.

    Notes
    -----
    Format (tfhrv beat CSV, version 1), UTF-8 text:

    - comment lines first, each ``# key: value``; always ``# format: tfhrv-beats-csv 1``,
      ``# record: <id>`` and ``# start: <ISO 8601 timestamp>`` (naive = local clock time),
      then ``synthetic``, ``profile``, ``seed``, ``n_intervals``, ``labels`` and a
      ``caution`` line;
    - the header ``beat_time_s,rr_ms,label``;
    - one row per interval: time of the beat that ends it in s from the start (4
      decimals), the interval in ms (3 decimals), the label of that beat (``N`` normal,
      ``V`` ventricular premature, ``S`` supraventricular premature, ``X`` artifact).

    An interval that spans a gap is kept, as long as the gap.  Each file is written to a
    temporary file in the same folder and moved into place with :func:`os.replace`, so a
    reader never sees a half-written file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from tfhrv.synth.recordings import simulate_recording
    >>> sim = simulate_recording(days=0.01, rng=1)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     p = write_recording_csv(sim, pathlib.Path(d) / "x.csv")
    ...     lines = p.read_text().splitlines()
    ...     has_truth = sidecar_path(p).exists()
    >>> lines[1], has_truth
    ('# record: synthetic', True)
    """
    if not (hasattr(sim, "recording") and isinstance(getattr(sim, "truth", None), dict)):
        raise TypeError(f"sim must be a SyntheticRecording, got {type(sim).__name__}")
    path = Path(path)
    rec = sim.recording
    start = rec.start.isoformat() if rec.start is not None else "unknown"
    head = [
        "# format: tfhrv-beats-csv 1",
        f"# record: {rec.record_id}",
        f"# start: {start}",
        "# synthetic: true (invented data, not from a person)",
        f"# profile: {sim.truth.get('profile', {}).get('name', 'unknown')}",
        f"# seed: {sim.truth.get('seed')}",
        f"# n_intervals: {rec.n_beats}",
        "# labels: N normal, V ventricular premature, S supraventricular premature, X artifact",
        "# caution: for research and software testing only; not for diagnosis",
        "beat_time_s,rr_ms,label",
    ]
    rows = [f"{t:.4f},{r:.3f},{lb}" for t, r, lb in
            zip(rec.beat_time_s.tolist(), rec.rr_ms.tolist(), rec.labels.tolist(), strict=True)]
    data = ("\n".join(head + rows) + "\n").encode("utf-8")
    if path.name.lower().endswith(".gz"):
        data = gzip.compress(data, compresslevel=6, mtime=0)
    _atomic_write(path, data)
    if truth_sidecar:
        text = json.dumps(sim.truth, indent=1, sort_keys=False) + "\n"
        _atomic_write(sidecar_path(path), text.encode("utf-8"))
    return path
