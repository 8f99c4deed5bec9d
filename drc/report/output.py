"""Writing a report file whole or not at all, and deciding whether a stream gets colour."""

from __future__ import annotations

import os
import secrets

from drc.errors import InputError, location_of_path


def write_atomic(path: str, text: str | bytes) -> None:
    """Write text (a str, written as UTF-8, or bytes as they are) to path through a temporary file in the same folder and os.replace.

    A failure leaves any existing file at path as it was and no temporary file behind; it
    raises InputError "cannot write PATH: REASON" located at the path. A target that exists
    but is not a regular file (a device such as /dev/null, a FIFO) is written in place.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(location_of_path(path),
                         f"cannot write {path}: folder {folder} does not exist")
    try:
        data = text if isinstance(text, bytes) else text.encode("utf-8")
    except UnicodeError as error:
        raise InputError(location_of_path(path), f"cannot write {path}: {error}") from None
    if os.path.exists(path) and not (os.path.isfile(path) or os.path.isdir(path)):
        _write_through(path, data)
        return
    temporary = os.path.join(folder, f".{os.path.basename(path)}.{secrets.token_hex(6)}.tmp")
    try:
        # 0o666 less the umask, as a plain open() would give the report.
        descriptor = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        try:
            with os.fdopen(descriptor, "wb") as stream:
                stream.write(data)
                stream.flush()
                os.fsync(stream.fileno())
        except BaseException:
            _remove(temporary)
            raise
        try:
            if os.path.exists(path):
                os.chmod(temporary, os.stat(path).st_mode & 0o7777)
            os.replace(temporary, path)
        except BaseException:
            _remove(temporary)
            raise
    except OSError as error:
        reason = error.strerror or str(error)
        raise InputError(location_of_path(path), f"cannot write {path}: {reason}") from None


def _write_through(path: str, data: bytes) -> None:
    """Write to a target that is not a regular file (/dev/null, a FIFO, a terminal) in place.

    Renaming a temporary file over it would replace the device or pipe with a plain file
    (`--output /dev/null` would turn /dev/null into a 32 MB file), and "whole or not at all"
    means nothing for a stream anyway.
    """
    try:
        with open(path, "wb") as stream:
            stream.write(data)
    except OSError as error:
        reason = error.strerror or str(error)
        raise InputError(location_of_path(path), f"cannot write {path}: {reason}") from None


def should_color(stream) -> bool:
    """True only when stream is a terminal and NO_COLOR is not set (https://no-color.org)."""
    if "NO_COLOR" in os.environ:
        return False
    isatty = getattr(stream, "isatty", None)
    if isatty is None:
        return False
    try:
        return bool(isatty())
    except (ValueError, OSError):
        return False


def _remove(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass
