"""Small file helpers shared by every stage: atomic writes and CSV reading with line numbers."""

from __future__ import annotations

import contextlib
import csv
import math
import os
import stat
import tempfile
import tomllib
from pathlib import Path

from .errors import InputError

__all__ = ["atomic_path", "atomic_open", "output_mode", "current_umask", "read_csv_rows", "parse_float", "read_toml",
           "check_output_path", "prepare_folder"]


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; rename it to ``path`` only on success.

    A failure (exception or Ctrl-C) removes the temporary file, so no half-written
    output is ever left under the final name.
    """
    path = Path(path)
    directory = path.parent if str(path.parent) else Path(".")
    if not directory.is_dir():
        raise InputError("output folder does not exist", path=directory)
    if not os.access(directory, os.W_OK):
        raise InputError("output folder is not writable", path=directory)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=directory)
    os.close(fd)
    try:
        yield Path(tmp)
        # mkstemp makes the file owner-only (0600); an output is a normal file that a
        # colleague on a shared drive opens, so it gets what open() would have given it
        os.chmod(tmp, output_mode(path))
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def current_umask():
    """The process's file-creation mask (e.g. 0o022), read without changing it where
    the system allows (Linux ``/proc/self/status``), else set and restored at once."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def output_mode(path):
    """Permission bits for an output written to ``path``: those of the file it replaces,
    else those ``open()`` gives a new file (0o666 less the umask: 0o644 under umask 022)."""
    try:
        return stat.S_IMODE(os.stat(path).st_mode)
    except OSError:
        return 0o666 & ~current_umask()


@contextlib.contextmanager
def atomic_open(path, mode="w", **kwargs):
    """Open a temporary file beside ``path`` for writing; rename it into place on success."""
    with atomic_path(path) as tmp:
        with open(tmp, mode, **kwargs) as handle:
            yield handle


def read_csv_rows(path):
    """Read a UTF-8 CSV file with a header row; ``#`` lines and blank lines are skipped.

    Returns
    -------
    header : list of str
        Column names, stripped and lower-cased.
    rows : list of (int, list of str)
        Each data row with its 1-based line number in the file.
    """
    path = Path(path)
    if not path.exists():
        raise InputError("file does not exist", path=path)
    if path.is_dir():
        raise InputError("is a folder, not a file", path=path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", path=path) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", path=path) from None
    header = None
    rows = []
    for lineno, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = [f.strip() for f in next(csv.reader([line]))]
        if header is None:
            header = [f.lower() for f in fields]
            _check_separator(header, path, lineno)
            continue
        if len(fields) > len(header):
            # a decimal comma splits one number into two fields and shifts every column after it
            raise InputError(f"{len(fields)} fields where the header has {len(header)}: decimal commas "
                             "(12,5 for 12.5) or a stray comma? tomo reads comma-separated values with decimal "
                             "points", path=path, line=lineno)
        rows.append((lineno, fields))
    if header is None:
        raise InputError("no header row found", path=path)
    return header, rows


#: Separators that spreadsheets use instead of the comma, named for messages.
_OTHER_SEPARATORS = {";": "semicolons", "\t": "tabs", "|": "vertical bars"}


def _check_separator(header, path, lineno):
    """Name the separator of a header that is not comma-separated (one field holding another one)."""
    if len(header) != 1:
        return
    for sep, name in _OTHER_SEPARATORS.items():
        if sep in header[0]:
            raise InputError(f"the columns are separated by {name} ({sep!r}), not commas (a spreadsheet saved "
                             "with a decimal comma?): save it as comma-separated values with decimal points",
                             path=path, line=lineno)


def parse_float(text, path, line, field):
    """Parse one CSV field as a finite float or raise an InputError naming its place."""
    try:
        value = float(text)
    except ValueError:
        hint = ""
        if "," in text:
            with contextlib.suppress(ValueError):
                float(text.replace(",", "."))
                hint = f" (a decimal comma? write {text.replace(',', '.')})"
        raise InputError(f"expected a number, got {text!r}{hint}", path=path, line=line, field=field) from None
    if not math.isfinite(value):
        raise InputError(f"expected a finite number, got {text!r}", path=path, line=line, field=field)
    return value


def read_toml(path):
    """Read a TOML file; InputError naming the file (and line) when it is missing or malformed."""
    path = Path(path)
    if not path.exists():
        raise InputError("file does not exist", path=path)
    try:
        with open(path, "rb") as handle:
            return tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        line = getattr(exc, "lineno", None)
        message = getattr(exc, "msg", str(exc))
        raise InputError(f"malformed TOML: {message}", path=path, line=line) from None
    except UnicodeDecodeError:
        raise InputError("not UTF-8 text", path=path) from None


def check_output_path(path):
    """Raise InputError unless ``path`` can be written (its folder exists and is writable,
    and it is not itself a folder). Used to refuse a request before any output is made."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if path.is_dir():
        raise InputError("is a folder, expected a file name", path=path)
    if not folder.is_dir():
        raise InputError("output folder does not exist", path=folder)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError("output folder is not writable", path=folder)
    return path


def prepare_folder(out_dir):
    """Create ``out_dir`` if needed and check it is writable; InputError otherwise."""
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError("exists and is not a folder", path=out_dir)
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder ({exc.strerror})", path=out_dir) from None
    if not os.access(out_dir, os.W_OK | os.X_OK):
        raise InputError("output folder is not writable", path=out_dir)
    return out_dir
