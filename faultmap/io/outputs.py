"""Place a run's outputs together: the GeoPackage, its figures, report and styles, or none of them.

A run's outputs are several files (the GeoPackage, figures in a folder, the report, one style file per
layer). They are written under hidden temporary names first; :func:`commit_outputs` then moves them
into place in one journaled step, so a failed or killed run never pairs new layers with old figures:

1. the journal ``.NAME.journal.json`` beside the GeoPackage lists every move;
2. each existing output that will be replaced or is no longer produced is renamed to a hidden backup;
3. each new file is renamed into place (same folder: an atomic rename);
4. the journal is marked committed (the commit point), then backups are deleted and the manifest
   ``.NAME.manifest.json`` records what this run wrote.

:func:`recover_outputs` (run by every later run's preflight) finishes an interrupted commit: back to the
earlier outputs when the commit point was not reached, forward to the new ones when it was. Only files
listed in the manifest of an earlier run are ever removed, so a figures folder shared with the user's
own files is safe.
"""

from __future__ import annotations

import json
import os
import uuid
from pathlib import Path

__all__ = ["temporary_name", "staged_name", "commit_outputs", "recover_outputs", "previous_outputs"]


def _journal(target: Path) -> Path:
    return target.parent / f".{target.stem}.journal.json"


def _manifest(target: Path) -> Path:
    return target.parent / f".{target.stem}.manifest.json"


def temporary_name(target: Path, kind: str, suffix: str, *, folder: Path | None = None) -> Path:
    """Hidden name for a file or folder being written for ``target``, carrying this process's id.

    ``.STEM.KIND.PID-RANDOM.tmpSUFFIX`` in ``folder`` (default: ``target``'s). The id lets a later run tell
    the left-overs of a killed run (its process is gone) from the files of a run still writing; see
    ``faultmap.io.gpkg.remove_stale_temporaries``.
    """
    where = target.parent if folder is None else Path(folder)
    return where / f".{target.stem}.{kind}.{os.getpid()}-{uuid.uuid4().hex[:8]}.tmp{suffix}"


def staged_name(target: Path, dest: Path) -> Path:
    """Hidden temporary name for ``dest`` in its own folder (so the final move is an atomic rename)."""
    return temporary_name(target, dest.name, "", folder=dest.parent)


def _write_json(path: Path, data: dict) -> None:
    tmp = path.with_name(f"{path.name}.{os.getpid()}-{uuid.uuid4().hex[:8]}.tmp")  # cleared if we are killed
    tmp.write_text(json.dumps(data, indent=1), encoding="utf-8")
    os.replace(tmp, path)


def _rel(path: Path, base: Path) -> str:
    return os.path.relpath(path, base)


def previous_outputs(target) -> list[Path]:
    """Files the last committed run beside ``target`` wrote (from its manifest), GeoPackage excluded."""
    target = Path(target)
    try:
        data = json.loads(_manifest(target).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return []
    return [(target.parent / p).resolve() for p in data.get("files", [])]


def _remove(path: Path) -> None:
    try:
        path.unlink()
    except FileNotFoundError:
        pass


def commit_outputs(target, files: dict) -> list[Path]:
    """Move staged outputs into place together (see the module notes).

    Parameters
    ----------
    target : path
        The run's GeoPackage (its folder holds the journal and the manifest).
    files : dict of pathlib.Path to pathlib.Path
        Final path -> staged file in the same folder (from :func:`staged_name`, or the checked
        temporary GeoPackage for ``target`` itself).

    Returns
    -------
    list of pathlib.Path
        Outputs of the earlier run that this run no longer produces and that were removed.
    """
    target = Path(target)
    base = target.parent
    new = {Path(d).resolve(): Path(s).resolve() for d, s in files.items()}
    gone = [p for p in previous_outputs(target) if p not in new and p.exists()]
    tag = f"{os.getpid()}-{uuid.uuid4().hex[:8]}"
    backups = {d: d.parent / f".{target.stem}.{d.name}.{tag}.bak" for d in [*new, *gone] if d.exists()}
    journal = {
        "committed": False,
        "moves": [[_rel(s, base), _rel(d, base)] for d, s in new.items()],
        "backups": [[_rel(d, base), _rel(b, base)] for d, b in backups.items()],
        "files": [_rel(d, base) for d in new if d != target.resolve()],
    }
    _write_json(_journal(target), journal)
    for d, b in backups.items():
        os.replace(d, b)
    for d, s in new.items():
        os.replace(s, d)
    journal["committed"] = True
    _write_json(_journal(target), journal)  # the commit point
    _finish(target, journal)
    return gone


def _finish(target: Path, journal: dict) -> None:
    base = target.parent
    for src, dst in journal["moves"]:
        if (base / src).exists():
            os.replace(base / src, base / dst)
    for _dst, bak in journal["backups"]:
        _remove(base / bak)
    _write_json(_manifest(target), {"files": journal["files"]})
    _remove(_journal(target))


def recover_outputs(target) -> str:
    """Finish a commit a killed run left half done; return ``"rolled back"``, ``"completed"`` or ``""``."""
    target = Path(target)
    path = _journal(target)
    try:
        journal = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return ""
    except (OSError, ValueError):
        _remove(path)  # a journal cut short while being written: no move had started
        return "rolled back"
    base = target.parent
    if journal.get("committed"):
        _finish(target, journal)
        return "completed"
    for src, dst in journal["moves"]:
        if not (base / src).exists() and (base / dst).exists():
            _remove(base / dst)  # moved in before the kill: the new file goes
        _remove(base / src)
    for dst, bak in journal["backups"]:
        if (base / bak).exists():
            os.replace(base / bak, base / dst)
    _remove(path)
    return "rolled back"
