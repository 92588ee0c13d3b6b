"""A capture the logbook could not take (locked past the wait, read-only, a
full disk) kept whole in a file of its own, to be stored later with
`glowtrace recover FILE`. The file is JSON: the capture's records as they
came off the link and its samples packed as in the logbook (base64), so
nothing is lost and nothing is re-encoded."""

import base64
import lzma
import json
import os
import tempfile
from pathlib import Path

from .. import paths
from ..errors import StoreError
from ..tester.raw import RawCapture
from . import samples_codec

FORMAT = "glowtrace unsaved capture"
FORMAT_VERSION = 1
_FIELDS = ("tube", "section", "port", "hello", "params", "channels", "ambient_c", "phases",
           "end", "trip", "incomplete_reason", "link", "started_at", "uuid")


class RecoveryError(StoreError):
    pass


def _write_atomic(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".unsaved-", suffix=".tmp")
    try:
        with os.fdopen(fd, "w") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def save_unsaved(raw: RawCapture, tube_type: str | None, notes: str | None,
                 logbook: Path, why: str, folders: list | None = None) -> Path:
    """Write the capture to the first folder that takes it (the data
    folder's unsaved/, then the working folder, then the system's temporary
    folder) and return the file's path."""
    meta, samples = samples_codec.encode(raw.blocks)
    doc = {"format": FORMAT, "version": FORMAT_VERSION, "logbook": str(logbook),
           "why": why, "tube_type": tube_type, "notes": notes,
           "capture": {k: getattr(raw, k) for k in _FIELDS},
           "encoding": samples_codec.ENCODING,
           "blocks": base64.b64encode(meta).decode(),
           "samples": base64.b64encode(samples).decode()}
    text = json.dumps(doc)
    tried = []
    for folder in folders or [paths.unsaved_dir(), Path.cwd(), Path(tempfile.gettempdir())]:
        path = Path(folder) / f"capture-{raw.uuid}.json"
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            _write_atomic(path, text)
            return path
        except OSError as e:
            tried.append(f"{folder}: {e.strerror or e}")
    raise RecoveryError("the capture could not be kept in any folder either (" +
                        "; ".join(tried) + ")")


def load_unsaved(path: str | Path) -> tuple[RawCapture, str | None, str | None]:
    """(the capture, its tube type, its notes) from a file save_unsaved wrote."""
    path = Path(path)
    try:
        doc = json.loads(path.read_text())
    except FileNotFoundError:
        raise RecoveryError(f"no file {path}") from None
    except IsADirectoryError:
        raise RecoveryError(f"{path} is a directory, not an unsaved capture") from None
    except (OSError, UnicodeDecodeError, ValueError) as e:
        raise RecoveryError(f"{path} is not an unsaved capture ({e})") from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise RecoveryError(f"{path} is not an unsaved capture of glowtrace")
    if doc.get("version") != FORMAT_VERSION or doc.get("encoding") not in samples_codec.KNOWN:
        raise RecoveryError(f"{path} was written by another version of glowtrace "
                            f"(format {doc.get('version')}, samples {doc.get('encoding')})")
    try:
        blocks = samples_codec.decode(doc["encoding"], base64.b64decode(doc["blocks"]),
                                      base64.b64decode(doc["samples"]))
        raw = RawCapture(blocks=blocks, **{k: doc["capture"][k] for k in _FIELDS})
    except (KeyError, TypeError, ValueError, lzma.LZMAError, RuntimeError) as e:
        raise RecoveryError(f"{path} is damaged: {e}") from None
    return raw, doc.get("tube_type"), doc.get("notes")
