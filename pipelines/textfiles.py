"""Decode the bytes of a user's text file (tables, core.toml, run configs, curve files).

One rule for every text input: UTF-8, with or without a byte-order mark; UTF-16 only with
its byte-order mark (which says so unambiguously). Anything else is refused with a message
naming the encoding it most likely is and the line where the first foreign byte sits, so
the user knows what to re-save. Nothing is guessed silently.
"""

from __future__ import annotations

import codecs
from pathlib import Path

from proxies.problems import InputError, Problem

__all__ = ["decode_text", "read_text"]

_BOMS = ((codecs.BOM_UTF8, "utf-8-sig"), (codecs.BOM_UTF16_LE, "utf-16"), (codecs.BOM_UTF16_BE, "utf-16"))
_SAVE_AS_UTF8 = "open it in a text editor or spreadsheet and save it as UTF-8 text"


def _likely_encoding(raw: bytes) -> str:
    """A plain-words guess at what a non-UTF-8 text is."""
    if raw[1::2].count(0) > len(raw) // 4 or raw[0::2].count(0) > len(raw) // 4:
        return "UTF-16 without a byte-order mark"
    if any(0x80 <= b <= 0x9F for b in raw):
        return "Windows-1252 (Western European)"
    return "Latin-1 (ISO-8859-1) or another single-byte encoding"


def decode_text(raw: bytes, name: str) -> str:
    """The text of a file's bytes under the rule of this module.

    Parameters
    ----------
    raw : bytes
        The file's content.
    name : str
        How problems name the file.

    Raises
    ------
    InputError
        Not UTF-8 (nor UTF-16 with a byte-order mark), or binary (NUL bytes); the message
        names the likely encoding and the line of the first foreign byte.
    """
    for bom, encoding in _BOMS:
        if raw.startswith(bom):
            try:
                return raw.decode(encoding)
            except UnicodeDecodeError:
                break
    if b"\x00" in raw[:4096]:
        kind = ("UTF-16 text without a byte-order mark" if _likely_encoding(raw).startswith("UTF-16")
                else "binary data (an image, a workbook or another program's file)")
        raise InputError(Problem(name, f"not a text file: it looks like {kind}",
                                 _SAVE_AS_UTF8 + " (a spreadsheet: save it as .xlsx or .csv)"))
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as error:
        line = raw[: error.start].count(b"\n") + 1
        byte = raw[error.start]
        raise InputError(Problem(
            name, f"not UTF-8 text: byte 0x{byte:02X} on line {line} (the file looks like "
                  f"{_likely_encoding(raw)})", _SAVE_AS_UTF8, row=line)) from None
    if "\x00" in text:
        raise InputError(Problem(name, f"binary data, not text (the file looks like {_likely_encoding(raw)})",
                                 _SAVE_AS_UTF8))
    return text


def read_text(path: str | Path, name: str) -> str:
    """Read and decode one text file; a folder, a missing or unreadable file is a problem."""
    path = Path(path)
    if path.is_dir():
        raise InputError(Problem(name, "is a folder, not a file", "give the name of a file"))
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(Problem(name, "file not found", "check the path")) from None
    except OSError as error:
        raise InputError(Problem(name, f"cannot read the file: {error.strerror or error}",
                                 "check permissions")) from None
    return decode_text(raw, name)
