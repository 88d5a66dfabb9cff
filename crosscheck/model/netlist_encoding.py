"""Netlist file bytes to text: UTF-8, UTF-16 and Windows-1252 (Latin-1) files read, binary data refused.

Netlists come from many editors: Windows tools save UTF-16 (with a byte order mark, or without one)
or Windows-1252, where ``µ`` is the single byte 0xb5. Each of those is read with a note that names
the encoding (and, for Windows-1252, the first line and byte that are not UTF-8). Real binary data is
refused: NUL bytes outside a UTF-16 pattern, bytes that no encoding here maps to a printable character,
or text that is mostly non-ASCII. Decoding only turns bytes into characters; the reader still refuses
control characters and everything outside its whitelist, so this path adds no new input to ngspice.
"""

from __future__ import annotations

import codecs
from os import PathLike

from crosscheck.errors import Location, NetlistError
from crosscheck.model.files import InputFileError, read_regular
from crosscheck.model.read_limits import DEFAULT_MAX_NETLIST_MIB, ReadLimits

#: The longest netlist file read by default (``model.netlist.MAX_TEXT_CHARS`` is the same limit on text);
#: a ``ReadLimits`` raises it for a trusted large netlist (``--max-netlist-mib``).
MAX_NETLIST_CHARS = DEFAULT_MAX_NETLIST_MIB * 2**20

__all__ = ["decode_netlist_bytes", "decode_netlist_bytes_with_notes"]

_SAMPLE = 4096  # bytes looked at to recognise UTF-16 without a byte order mark
_MOSTLY = 0.95  # share of NULs in the high byte of UTF-16 text that is mostly ASCII
_MAX_NON_ASCII = 0.3  # beyond this share of bytes above 0x7f, a non-UTF-8 file is taken for binary data


def decode_netlist_bytes(data: bytes, file: str) -> str:
    """Netlist file bytes as text (see ``decode_netlist_bytes_with_notes``; the notes are dropped)."""
    return decode_netlist_bytes_with_notes(data, file)[0]


def decode_netlist_bytes_with_notes(data: bytes, file: str) -> tuple[str, tuple[str, ...]]:
    """The text, and a note when it was not UTF-8; binary data is refused with the line and the byte."""
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)) and not data.startswith(codecs.BOM_UTF32_LE):
        return _utf16(data, "utf-16", "UTF-16 (it starts with a byte order mark)", file)
    order = _utf16_order(data)
    if order is not None:
        return _utf16(data, f"utf-16-{order}", f"UTF-16 {order.upper()} without a byte order mark", file)
    nul = data.find(b"\x00")
    if nul >= 0:
        raise NetlistError(
            "the file contains NUL bytes: it is binary data, not a netlist; give the SPICE text file",
            Location(file, data.count(b"\n", 0, nul) + 1),
        )
    try:
        return data.decode("utf-8"), ()
    except UnicodeDecodeError as exc:
        return _windows_1252(data, exc.start, file)


def _utf16_order(data: bytes) -> str | None:
    """``"le"`` or ``"be"`` when the bytes look like mostly-ASCII UTF-16 (a NUL in every other byte)."""
    sample = data[: _SAMPLE - _SAMPLE % 2] if len(data) >= 4 else b""
    sample = sample[: len(sample) - len(sample) % 2]
    if not sample:
        return None
    even, odd = sample[0::2], sample[1::2]
    for order, high, low in (("le", odd, even), ("be", even, odd)):
        if high.count(0) >= _MOSTLY * len(high) and low.count(0) == 0:
            return order
    return None


def _utf16(data: bytes, codec: str, what: str, file: str) -> tuple[str, tuple[str, ...]]:
    try:
        text = data.decode(codec)
    except UnicodeDecodeError as exc:
        raise NetlistError(
            f"the file looks like {what} but byte {exc.start} is not valid UTF-16: it is binary data "
            "or a damaged file; save the netlist as UTF-8 text",
            Location(file),
        ) from None
    return text, (f"{Location(file, 1)}: the file is {what}; read as UTF-16 (saving it as UTF-8 is more portable)",)


def _windows_1252(data: bytes, start: int, file: str) -> tuple[str, tuple[str, ...]]:
    """Text that is not UTF-8 read as Windows-1252 (Latin-1 with printable characters at 0x80-0x9f)."""
    bad = start
    text = None
    if sum(b > 0x7F for b in data) <= _MAX_NON_ASCII * len(data):
        try:
            text = data.decode("cp1252")
        except UnicodeDecodeError as exc:  # 0x81 0x8d 0x8f 0x90 0x9d: control codes, not text
            bad = exc.start
    if text is None:
        raise NetlistError(
            f"the file is neither UTF-8 nor Windows-1252/Latin-1 text (byte 0x{data[bad]:02x}); "
            "save it as UTF-8 (a binary file is not a netlist)",
            Location(file, data.count(b"\n", 0, bad) + 1),
        )
    where = Location(file, data.count(b"\n", 0, start) + 1)
    return text, (
        f"{where}: the file is not UTF-8: byte 0x{data[start]:02x} "
        f"on this line was read as {text[start]!r}, and the whole file as Windows-1252 (Latin-1); "
        "save it as UTF-8 to be sure each character is what you meant",
    )


def read_netlist_text(path: str | PathLike, *, limits: ReadLimits | None = None) -> str:
    """The text of a netlist file; unreadable, oversized or binary files are refused (see the notes variant)."""
    return read_netlist_text_with_notes(path, limits=limits)[0]


def read_netlist_text_with_notes(
    path: str | PathLike, *, limits: ReadLimits | None = None
) -> tuple[str, tuple[str, ...]]:
    """The text of a netlist file and a note when it was decoded from UTF-16 or Windows-1252.

    ``limits``: its ``max_netlist_bytes`` bounds the file (None: ``MAX_NETLIST_CHARS``, for untrusted input).
    """
    file = str(path)
    most = MAX_NETLIST_CHARS if limits is None else limits.max_netlist_bytes
    try:
        data = read_regular(path, most)
    except InputFileError as exc:
        if exc.too_large is not None:
            shown = limits or ReadLimits(max_netlist_mib=-(-most // 2**20))
            raise NetlistError(shown.size_refusal(exc.too_large, "bytes"), Location(file)) from None
        raise NetlistError(f"cannot read the netlist: {exc}; check the path", Location(file)) from None
    return decode_netlist_bytes_with_notes(data, file)
