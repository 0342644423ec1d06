"""Safe reading of the text files users give us: one place for every reader's checks.

Every text input (project file, calorimetry export, growth-rate table, temperature log,
material file) goes through :func:`read_text`:

* only a regular file is opened, and without blocking: a FIFO, a device such as
  ``/dev/zero`` or a folder is refused with one line instead of hanging the program or
  filling the memory;
* at most :func:`text_limit_bytes` bytes are read (64 MiB unless the environment variable
  ``SPHEROKIN_MAX_TEXT_MB`` says otherwise), so no file can exhaust the machine;
* the encoding is detected: UTF-8 with or without a byte-order mark, UTF-16 (LE or BE,
  with a mark, or without one when every other byte is zero), then Windows-1252 and
  Latin-1 for older instrument exports; binary data is refused.

Delimited tables are split with :func:`split_fields` and checked with
:func:`check_field_count`: a data row whose field count differs from the header is an
error naming the line (a decimal comma in a comma-separated file, ``124,14,6,0.3``,
would otherwise be read as other numbers). Quoted excerpts in messages are cut by
:func:`excerpt`, so an error line stays one short line whatever the file holds.
"""

from __future__ import annotations

import csv
import os
import stat
from pathlib import Path

from analysis.errors import InputError

__all__ = ["DEFAULT_TEXT_LIMIT_MB", "MAX_FIELDS", "TEXT_LIMIT_ENV", "check_field_count",
           "decode_text", "excerpt", "open_regular_file", "read_text", "require_regular_file",
           "split_fields", "text_limit_bytes"]

#: Environment variable raising (or lowering) the size limit of one text input, in MiB.
TEXT_LIMIT_ENV = "SPHEROKIN_MAX_TEXT_MB"
#: A DSC export of a day-long isotherm at 10 Hz is ~30 MB; 64 MiB leaves room and still
#: bounds the memory a hostile file can take (text and parsed rows ~10x the bytes).
DEFAULT_TEXT_LIMIT_MB = 64
#: Fields on one line beyond any real table (a DSC export has under 20 columns).
MAX_FIELDS = 1000
#: Longest quoted excerpt of user data in an error message, characters.
EXCERPT_CHARS = 40
_SNIFF_BYTES = 4096


def excerpt(text: str, limit: int = EXCERPT_CHARS) -> str:
    """``repr`` of ``text`` cut to about ``limit`` characters (``...`` marks a cut)."""
    text = str(text)
    if len(text) <= limit:
        return repr(text)
    return repr(text[:limit]) + f"... ({len(text)} characters)"


def text_limit_bytes() -> int:
    """The size limit of one text input in bytes (``SPHEROKIN_MAX_TEXT_MB`` or 64 MiB)."""
    value = os.environ.get(TEXT_LIMIT_ENV, "").strip()
    if not value:
        return DEFAULT_TEXT_LIMIT_MB * 2**20
    try:
        megabytes = float(value)
    except ValueError:
        raise InputError(f"{TEXT_LIMIT_ENV}={excerpt(value)} is not a number of MiB") from None
    if not 0 < megabytes < 2**40:
        raise InputError(f"{TEXT_LIMIT_ENV}={value} must be a positive number of MiB")
    return int(megabytes * 2**20)


def _kind_of(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def require_regular_file(path, what: str = "file") -> Path:
    """``path`` as a Path if it is an existing regular file, else :class:`InputError`.

    Only ``stat`` is called: nothing is opened, so a FIFO cannot block.
    """
    path = Path(path)
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputError(f"no such {what}", path) from None
    except OSError as err:
        raise InputError(f"cannot read the {what} ({err.strerror})", path) from None
    if not stat.S_ISREG(mode):
        raise InputError(f"the {what} is {_kind_of(mode)}; expected a regular file", path)
    return path


def open_regular_file(path, what: str = "file"):
    """Open ``path`` for binary reading only if it is a regular file.

    The file is opened non-blocking and checked with ``fstat`` on the open descriptor, so
    a FIFO swapped in after a ``stat`` cannot hang the program either.
    """
    require_regular_file(path, what)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    try:
        descriptor = os.open(path, flags)
    except OSError as err:
        raise InputError(f"cannot read the {what} ({err.strerror})", path) from None
    mode = os.fstat(descriptor).st_mode
    if not stat.S_ISREG(mode):
        os.close(descriptor)
        raise InputError(f"the {what} is {_kind_of(mode)}; expected a regular file", path)
    return os.fdopen(descriptor, "rb")


def read_bytes_limited(path, what: str = "file", limit_bytes: int | None = None) -> bytes:
    """The bytes of a regular file, refused when larger than the limit."""
    limit = text_limit_bytes() if limit_bytes is None else int(limit_bytes)
    with open_regular_file(path, what) as handle:
        try:
            raw = handle.read(limit + 1)
        except OSError as err:
            raise InputError(f"cannot read the {what} ({err.strerror})", path) from None
    if len(raw) > limit:
        raise InputError(
            f"the {what} is larger than the {limit / 2**20:.3g} MiB limit for text inputs "
            f"(raise it with the environment variable {TEXT_LIMIT_ENV}=<MiB>)", path)
    return raw


def _utf16_without_bom(head: bytes) -> str | None:
    """'utf-16-le' / 'utf-16-be' when every other byte of ASCII-range text is zero."""
    if len(head) < 4:
        return None
    even, odd = head[0::2], head[1::2]
    zeros_even, zeros_odd = even.count(0) / len(even), odd.count(0) / len(odd)
    if zeros_odd > 0.9 and zeros_even < 0.1:
        return "utf-16-le"
    if zeros_even > 0.9 and zeros_odd < 0.1:
        return "utf-16-be"
    return None


def _looks_binary(text: str) -> bool:
    """Control characters other than tab, CR, LF, FF in more than 1 % of the text."""
    head = text[:_SNIFF_BYTES]
    controls = sum(1 for ch in head if ord(ch) < 32 and ch not in "\t\r\n\f")
    return controls > 0.01 * max(len(head), 1)


def decode_text(raw: bytes, path=None, what: str = "file") -> str:
    """Decode exported text: UTF-8 (BOM optional), UTF-16 (LE/BE), cp1252, Latin-1."""
    if raw.startswith(b"\xef\xbb\xbf"):
        encodings = ["utf-8-sig"]
    elif raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        encodings = ["utf-16"]
    else:
        guessed = _utf16_without_bom(raw[:_SNIFF_BYTES])
        if guessed is not None:
            encodings = [guessed]
        elif b"\x00" in raw[:_SNIFF_BYTES]:
            raise InputError(f"the {what} is binary, not text", path)
        else:
            encodings = ["utf-8", "cp1252", "latin-1"]
    for encoding in encodings:
        try:
            text = raw.decode(encoding)
        except UnicodeDecodeError:
            continue
        if _looks_binary(text):
            raise InputError(f"the {what} is binary, not text", path)
        return text
    raise InputError(f"the {what} cannot be decoded as text ({encodings[0]})", path)


def read_text(path, what: str = "file", limit_bytes: int | None = None) -> str:
    """Text of a regular file within the size limit, with its encoding detected."""
    return decode_text(read_bytes_limited(path, what, limit_bytes), path, what)


def split_fields(line: str, delimiter: str, *, line_no: int | None = None, path=None,
                 quoted: bool = False) -> list[str]:
    """Fields of one delimited line; whitespace delimiter ``" "`` splits on runs.

    ``quoted`` honours CSV double quotes. More than :data:`MAX_FIELDS` fields is an
    error naming the line (checked before splitting, so a huge line costs no memory).
    """
    count = len(line.split()) if delimiter == " " and len(line) < 100_000 else line.count(delimiter) + 1
    if count > MAX_FIELDS:
        where = f"line {line_no}" if line_no is not None else "a line"
        raise InputError(f"{where} has more than {MAX_FIELDS} fields ({count}); not a table "
                         f"this program reads: {excerpt(line)}", path)
    if delimiter == " ":
        return line.split()
    if quoted and '"' in line:
        return next(csv.reader([line], delimiter=delimiter))
    return line.split(delimiter)


def check_field_count(fields: list[str], expected: int, *, line_no: int, line: str, path,
                      delimiter: str = ",") -> None:
    """A data row must have as many fields as the header; the message names the line."""
    if len(fields) == expected:
        return
    hint = ""
    if delimiter == "," and len(fields) > expected:
        hint = " (a decimal comma in a comma-separated file?)"
    raise InputError(f"line {line_no} has {len(fields)} fields but the header has {expected}"
                     f"{hint}: {excerpt(line.strip())}", path)
