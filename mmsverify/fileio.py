"""Reading and writing the tool's own files: whole-file writes, JSON reads with clear errors."""

import json
from pathlib import Path

from mmsverify.errors import MMSError

__all__ = ["write_atomic", "load_json_file"]


def write_atomic(path, text):
    """Write text to ``path`` through a temporary file, creating folders; returns the Path."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return path


def load_json_file(path, what="file", missing_hint=""):
    """Parsed JSON of a file; a missing or unreadable file is an MMSError naming it."""
    path = Path(path)
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise MMSError(f"{path}: no such {what}{missing_hint}") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise MMSError(f"{path}: cannot read it as JSON ({exc})") from None
