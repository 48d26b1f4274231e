"""Reading and writing files: whole-file writes, and reading a user's file without trusting it.

Every file a user or another program hands to mmsverify (problem files, study
JSON, level CSV and profile files, an external program's output) is read
through :func:`read_text` or :func:`read_bytes`: the path must lead to a
regular file (a device such as ``/dev/zero``, a named pipe or a socket is
refused before it is opened, so nothing blocks or fills memory), the file
must fit a size limit, and text is UTF-8 with an optional byte-order mark.

:func:`load_json` adds what a JSON file needs before its contents are
looked at: nesting depth and size are bounded before parsing, and ``NaN``
and ``Infinity`` are refused. The ``need_*`` functions then check one value
each and say which entry of which file is wrong.
"""

import json
import math
import os
from pathlib import Path
import re
import stat
from itertools import accumulate

from mmsverify.errors import MMSError

__all__ = ["write_atomic", "load_json_file", "MAX_FILE_BYTES", "MAX_JSON_DEPTH", "regular_file", "read_bytes", "read_text", "load_json", "MISSING", "need",
           "need_str", "need_number", "need_int", "need_bool", "need_choice", "need_list", "need_dict"]

#: Default size limit of a file read whole (64 MiB); callers with smaller files pass smaller limits.
MAX_FILE_BYTES = 64 * 2**20
#: Deepest nesting of arrays and objects accepted in a JSON file; mmsverify writes at most 5.
MAX_JSON_DEPTH = 32

_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a named pipe"), (stat.S_ISSOCK, "a socket"),
          (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"))


def _kind(mode):
    return next((name for test, name in _KINDS if test(mode)), "not a regular file")


def _refuse_special(path, mode, what):
    if not stat.S_ISREG(mode):
        raise MMSError(f"{path}: this {what} is {_kind(mode)}, not a regular file; give the path of a file")


def regular_file(path, what="file", missing_hint=""):
    """The :func:`os.stat` of ``path``, refused unless it is a regular file (also behind a symbolic link).

    Devices, pipes, sockets and folders are refused before anything opens
    them, with an :class:`~mmsverify.errors.MMSError` naming the path and
    ``what`` it should be.
    """
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise MMSError(f"{path}: no such {what}{missing_hint}") from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL character in the path
        raise MMSError(f"{path}: cannot read this {what} ({exc})") from None
    _refuse_special(path, st.st_mode, what)
    return st


def read_bytes(path, what="file", max_bytes=MAX_FILE_BYTES, missing_hint=""):
    """The bytes of a regular file (see :func:`regular_file`) of at most ``max_bytes`` bytes.

    The opened file is checked again, so a pipe swapped in after the check
    is refused too, without blocking.
    """
    size = regular_file(path, what, missing_hint).st_size
    if size > max_bytes:
        raise MMSError(f"{path}: {size} bytes is far too large for a {what} (at most {max_bytes}); it was not read")
    try:
        # O_NONBLOCK: a pipe swapped in after the check must not block the open
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0))
    except FileNotFoundError:
        raise MMSError(f"{path}: no such {what}{missing_hint}") from None
    except OSError as exc:
        raise MMSError(f"{path}: cannot read this {what} ({exc})") from None
    with os.fdopen(fd, "rb") as f:
        try:
            st = os.fstat(fd)
            _refuse_special(path, st.st_mode, what)
            # a read reserves its whole size at once: first the size the file states, then small pieces
            # in case it grew (a read of max_bytes + 1 would hold that much memory for a small file)
            chunks, total, piece = [], 0, min(st.st_size, max_bytes) + 1
            while total <= max_bytes:
                chunk = f.read(min(max_bytes + 1 - total, piece))
                piece = 1 << 20
                if not chunk:
                    break
                chunks.append(chunk)
                total += len(chunk)
            data = b"".join(chunks)
        except OSError as exc:
            raise MMSError(f"{path}: cannot read this {what} ({exc})") from None
    if len(data) > max_bytes:
        raise MMSError(f"{path}: this {what} grew past the limit of {max_bytes} bytes while it was read")
    return data


def read_text(path, what="file", max_bytes=MAX_FILE_BYTES, missing_hint=""):
    """The text of a regular file (UTF-8, a leading byte-order mark dropped); see :func:`read_bytes`."""
    data = read_bytes(path, what, max_bytes, missing_hint)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise MMSError(f"{path}: cannot read it as UTF-8 text (byte {exc.start}: {exc.reason})") from None


# A string runs to its closing quote or, unterminated, to the end of the text: the pattern matches at every
# quote it starts from, so the scan stays linear however the quotes and backslashes are arranged.
_STRINGS = re.compile(r'"(?:[^"\\]|\\.|\\\Z)*(?:"|\Z)', re.DOTALL)
_KEEP = re.compile(r"[^\[\]{}]+")


def json_depth(text):
    """Deepest nesting of arrays and objects in JSON text (strings skipped), found without parsing it."""
    brackets = _KEEP.sub("", _STRINGS.sub("", text))
    if not brackets:
        return 0
    return max(accumulate(1 if c in "[{" else -1 for c in brackets))


def _no_constant(name):
    raise ValueError(f"{name} is not a number JSON holds; write finite numbers (null for an undefined one)")


def load_json(path, what="file", max_bytes=MAX_FILE_BYTES, max_depth=MAX_JSON_DEPTH, missing_hint=""):
    """Parsed JSON of a regular file: bounded size and depth, no ``NaN``/``Infinity``, a BOM accepted."""
    text = read_text(path, what, max_bytes, missing_hint)
    depth = json_depth(text)
    if depth > max_depth:
        raise MMSError(f"{path}: this {what} nests arrays and objects {depth} deep, more than the limit "
                       f"{max_depth}; it is not a file mmsverify wrote")
    try:
        return json.loads(text, parse_constant=_no_constant)
    except (ValueError, RecursionError) as exc:  # JSONDecodeError, the constants, over-long integers
        raise MMSError(f"{path}: cannot read this {what} as JSON ({exc})") from None


def write_atomic(path, text):
    """Write text to ``path`` through a temporary file, creating folders; returns the Path."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return path


def load_json_file(path, what="file", missing_hint="", max_bytes=MAX_FILE_BYTES):
    """Parsed JSON of a regular file (see :func:`load_json`); any refusal is an MMSError naming the file."""
    return load_json(Path(path), what, max_bytes, missing_hint=missing_hint)


# --- the typed reader -------------------------------------------------------------------------------

#: Marks a ``need_*`` call without a default: the key is required.
MISSING = object()


def _show(value):
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def need(data, key, where, default=MISSING):
    """``data[key]``, or ``default``; a missing required key is an error naming ``where``."""
    if not isinstance(data, dict):
        raise MMSError(f"{where}: expected an object, got {type(data).__name__} {_show(data)}")
    if key in data:
        return data[key]
    if default is MISSING:
        raise MMSError(f"{where}: missing key {key!r}")
    return default


def _wrong(where, key, expected, value):
    at = f"{where}, key {key!r}" if key is not None else where
    return MMSError(f"{at}: expected {expected}, got {type(value).__name__} {_show(value)}")


def need_str(data, key, where, default=MISSING, max_len=100_000):
    """A string of at most ``max_len`` characters."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    if not isinstance(value, str) or len(value) > max_len:
        raise _wrong(where, key, f"text of at most {max_len} characters", value)
    return value


def as_number(value, where, key=None, *, null=False, minimum=None, positive=False):
    """A finite float from a JSON number (not a boolean); ``null=True`` reads ``None`` as NaN."""
    if value is None and null:
        return math.nan
    expected = "a positive finite number" if positive else "a finite number"
    if minimum is not None:
        expected += f" at least {minimum}"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _wrong(where, key, expected + (" or null" if null else ""), value)
    try:
        x = float(value)
    except OverflowError:
        x = math.inf
    if not math.isfinite(x) or (positive and x <= 0) or (minimum is not None and x < minimum):
        raise _wrong(where, key, expected, value)
    return x


def need_number(data, key, where, default=MISSING, **limits):
    """A finite float (see :func:`as_number` for ``null``, ``minimum`` and ``positive``)."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    return as_number(value, where, key, **limits)


def as_int(value, where, key=None, *, minimum=0, maximum=10**9, null=False):
    """A whole number in ``[minimum, maximum]`` (not a boolean, not a float); ``null=True`` passes None."""
    if value is None and null:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or not minimum <= value <= maximum:
        raise _wrong(where, key, f"a whole number from {minimum} to {maximum}", value)
    return value


def need_int(data, key, where, default=MISSING, **limits):
    """A whole number (see :func:`as_int`)."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    return as_int(value, where, key, **limits)


def need_bool(data, key, where, default=MISSING):
    """``true`` or ``false``."""
    value = need(data, key, where, default)
    if key in data and not isinstance(value, bool):
        raise _wrong(where, key, "true or false", value)
    return value


def need_choice(data, key, where, choices, default=MISSING):
    """One of ``choices``; the message lists them."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    if not isinstance(value, str) or value not in choices:
        raise _wrong(where, key, "one of " + ", ".join(map(str, choices)), value)
    return value


def need_list(data, key, where, default=MISSING, max_len=100_000):
    """A list of at most ``max_len`` items."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    if not isinstance(value, list) or len(value) > max_len:
        raise _wrong(where, key, f"a list of at most {max_len} items", value)
    return value


def need_dict(data, key, where, default=MISSING, max_len=100_000):
    """An object of at most ``max_len`` keys."""
    value = need(data, key, where, default)
    if key not in data:  # the default, given since the key may be missing
        return value
    if not isinstance(value, dict) or len(value) > max_len:
        raise _wrong(where, key, f"an object of at most {max_len} keys", value)
    return value
