"""Opening a workbook's zip archive without trusting it.

An .xlsx workbook is a zip archive of XML parts (ECMA-376 Part 2, Open Packaging
Conventions). A hostile archive can declare small sizes and inflate to gigabytes (a "zip
bomb"), declare document types whose entities expand without bound, or use compression a
spreadsheet program never writes. :func:`verified_workbook_archive` therefore checks the
archive's directory first (a zip, holding a workbook, few enough members, plausible sizes)
and then inflates each XML part itself, a chunk at a time, against one running byte budget
for the whole workbook, so nothing is ever inflated past :data:`MAX_EXPANDED_BYTES`
whatever the archive declares. A part's XML must be UTF-8 or UTF-16, so that a document
type is found whatever bytes spell it. The parts come out as a new in-memory archive of
stored (uncompressed) members whose sizes are now known to be true; the reader works on
that copy. Parts the reader never reads (images, printer settings, embedded objects) are
never inflated: the copy holds them as empty members so that every reference still
resolves.

References
----------
.. [1] PKWARE, *APPNOTE.TXT - .ZIP File Format Specification*, version 6.3.10 (2022),
   §4.3.7 (local file header), §4.4.4 (general purpose bit flag: encryption), §4.4.5
   (compression method: 0 stored, 8 deflated).
.. [2] RFC 1951, *DEFLATE Compressed Data Format Specification* (1996), §3.2.4: a stored
   block costs 5 bytes of header per at most 65 535 bytes, so an honest deflate stream is
   never much longer than the data it holds.
.. [3] ECMA-376 Office Open XML File Formats, 5th edition (2016), Part 2 (packaging),
   §8.1.4 (XML content is UTF-8 or UTF-16; from memory).
.. [4] W3C, *Extensible Markup Language (XML) 1.0*, 5th edition (2008), §4.3.3 and
   Appendix F (an entity's encoding, from its byte-order mark and declaration).
"""

from __future__ import annotations

import io
import re
import zipfile
import zlib

__all__ = [
    "ScheduleFileError",
    "MAX_EXPANDED_BYTES",
    "MAX_ARCHIVE_MEMBERS",
    "verified_workbook_archive",
]

#: [bytes] Most XML a workbook may inflate to, all parts together. A 20 000-panel schedule
#: is about 11 MB of sheet XML; this allows some 90 000 rows and keeps the reader's memory
#: well under a gigabyte. Checked against the declared sizes first, then while inflating.
MAX_EXPANDED_BYTES = 50_000_000
#: A workbook has a few dozen parts; far more means a damaged or hostile archive.
MAX_ARCHIVE_MEMBERS = 10_000
_CHUNK = 1 << 20  # [bytes] inflated per read: the most memory one read can take
_NEEDED_SUFFIXES = (".xml", ".rels")  # the parts the reader opens
_DOCTYPE_MARKERS = ("<!DOCTYPE", "<!ENTITY")
_MARKER_OVERLAP = 64  # [bytes] kept between chunks so a marker split by a chunk is found
# The encodings a package's XML may use (ECMA-376 Part 2 §8.1.4, from memory: UTF-8 or
# UTF-16), found from the byte-order mark or the first characters (W3C XML 1.0, 5th
# edition, Appendix F); a declaration naming any other is refused, so that the markers
# above are looked for in the bytes the XML parser will read.
_UTF16_STARTS = ((b"\xff\xfe", "utf-16-le"), (b"\xfe\xff", "utf-16-be"),
                 (b"<\x00?\x00", "utf-16-le"), (b"\x00<\x00?", "utf-16-be"))
_DECLARED_ENCODING = re.compile(r"""^\s*<\?xml[^>]*?\bencoding\s*=\s*["']([^"']*)["']""")


class ScheduleFileError(Exception):
    """A whole file cannot be read (missing, not a workbook, too large); the message says why."""


def _megabytes(count: int) -> str:
    return f"{count / 1e6:.0f} MB" if count >= 1e6 else f"{count / 1e3:.0f} kB"


def _needed(info: zipfile.ZipInfo) -> bool:
    return info.filename.lower().endswith(_NEEDED_SUFFIXES)


def _check_directory(archive: zipfile.ZipFile, name: str) -> list[zipfile.ZipInfo]:
    """Refuse an archive whose directory alone shows it is not a workbook, or not honest."""
    infos = archive.infolist()
    if len(infos) > MAX_ARCHIVE_MEMBERS:
        raise ScheduleFileError(f"{name} holds {len(infos)} archive members; refusing (a "
                                f"workbook has far fewer than {MAX_ARCHIVE_MEMBERS})")
    names = [info.filename for info in infos]
    if len(set(names)) != len(names):
        raise ScheduleFileError(f"{name} is not a readable workbook: the zip archive names "
                                "one part twice (damaged or forged)")
    if "[Content_Types].xml" not in names or not any(
            n.startswith("xl/workbook") and n.endswith((".xml", ".bin")) for n in names):
        raise ScheduleFileError(f"{name} is a zip archive but not an Excel workbook (.xlsx)")
    if "xl/workbook.bin" in names and "xl/workbook.xml" not in names:
        raise ScheduleFileError(f"{name} is a binary workbook (.xlsb); save it as .xlsx")
    needed = [info for info in infos if _needed(info)]
    declared = sum(info.file_size for info in needed)
    if declared > MAX_EXPANDED_BYTES:
        raise ScheduleFileError(
            f"{name}: archive expands to {_megabytes(declared)}; refusing (the limit is "
            f"{_megabytes(MAX_EXPANDED_BYTES)})")
    for info in needed:
        if info.flag_bits & 0x1:
            raise ScheduleFileError(f"{name} is encrypted (password-protected); save an "
                                    "unprotected copy as .xlsx")
        if info.compress_type not in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED):
            raise ScheduleFileError(
                f"{name}: part {info.filename} uses a compression method spreadsheet "
                "programs do not write; refusing (save the workbook again as .xlsx)")
        # An honest deflate stream is at most a little longer than its data [2]; a stored
        # part's data is its data.
        longest = (info.file_size if info.compress_type == zipfile.ZIP_STORED
                   else info.file_size + info.file_size // 1000 + 1024)
        if info.compress_size > longest:
            raise ScheduleFileError(
                f"{name}: part {info.filename} declares {_megabytes(info.file_size)} but "
                f"holds {_megabytes(info.compress_size)} of compressed data; the archive's "
                "sizes are forged or damaged; refusing")
    return infos


def _doctype_markers(head: bytes, part: str, name: str) -> tuple[bytes, ...]:
    """The document-type markers as this part's encoding writes them; refuse an encoding a
    package's XML may not use (the XML parser would decode it and the markers go unseen)."""
    codec = next((c for start, c in _UTF16_STARTS if head.startswith(start)), "utf-8")
    text = head.decode(codec, errors="replace").lstrip("\ufeff")
    if text.lstrip().startswith("<?xml"):
        declaration = text[:text.find("?>") + 2] if "?>" in text else ""
        declared = _DECLARED_ENCODING.match(declaration)
        encoding = declared.group(1).strip().lower().replace("_", "-") if declared else ""
        allowed = (("", "utf-8", "utf8") if codec == "utf-8" else
                   ("", "utf-16", "utf16", "utf-16le", "utf-16be", "utf-16-le", "utf-16-be"))
        if not declaration or encoding not in allowed:
            shown = declared.group(1)[:20] if declared else "(unreadable)"
            raise ScheduleFileError(
                f"{name}: part {part} declares the encoding {shown!r}; a workbook's XML is "
                "UTF-8 or UTF-16; refusing")
    return tuple(marker.encode(codec) for marker in _DOCTYPE_MARKERS)


def _copy_part(archive: zipfile.ZipFile, info: zipfile.ZipInfo, target: zipfile.ZipFile,
               spent: int, name: str) -> int:
    """Inflate one part into ``target`` a chunk at a time; return the bytes spent so far."""
    tail = b""
    markers: tuple[bytes, ...] = ()
    with archive.open(info) as source, target.open(info.filename, "w") as sink:
        while True:
            chunk = source.read(_CHUNK)
            if not chunk:
                return spent
            if not markers:
                markers = _doctype_markers(chunk[:400], info.filename, name)
            spent += len(chunk)
            if spent > MAX_EXPANDED_BYTES:
                raise ScheduleFileError(
                    f"{name}: archive expands to more than {_megabytes(MAX_EXPANDED_BYTES)} "
                    f"(part {info.filename} inflates beyond its declared size); refusing")
            seam = tail + chunk[:_MARKER_OVERLAP]
            if any(marker in chunk or marker in seam for marker in markers):
                raise ScheduleFileError(
                    f"{name}: part {info.filename} declares an XML document type "
                    "(<!DOCTYPE> or <!ENTITY>); spreadsheet programs never write one and "
                    "its entities could expand without bound; refusing")
            tail = chunk[-_MARKER_OVERLAP:]
            sink.write(chunk)


def verified_workbook_archive(data: bytes, name: str) -> io.BytesIO:
    """A workbook's XML parts, inflated within the byte budget, as a trusted archive.

    Parameters
    ----------
    data : bytes
        The file's content.
    name : str
        The file as messages name it.

    Returns
    -------
    io.BytesIO
        A zip archive (at position 0) with every XML part stored uncompressed at its true
        size, and every other part present but empty.

    Raises
    ------
    ScheduleFileError
        Not a zip archive, not a workbook, an .xls or .xlsb workbook, encrypted, damaged
        (a bad CRC, sizes that cannot be true), a document type declaration, or more than
        :data:`MAX_EXPANDED_BYTES` of XML whatever the archive declares.
    """
    if not data.startswith(b"PK"):
        if data.startswith(b"\xd0\xcf\x11\xe0"):
            raise ScheduleFileError(
                f"{name} is an Excel 97-2003 workbook (.xls); save it as .xlsx and try again")
        raise ScheduleFileError(f"{name} is not an Excel workbook (.xlsx): it is not a zip archive")
    buffer = io.BytesIO()
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            infos = _check_directory(archive, name)
            spent = 0
            with zipfile.ZipFile(buffer, "w", zipfile.ZIP_STORED) as target:
                for info in infos:
                    if _needed(info):
                        spent = _copy_part(archive, info, target, spent, name)
                    else:
                        target.writestr(info.filename, b"")
    except ScheduleFileError:
        raise
    except (zipfile.BadZipFile, zipfile.LargeZipFile, zlib.error, EOFError, OSError,
            ValueError, NotImplementedError, RuntimeError) as exc:
        raise ScheduleFileError(f"{name} is not a readable workbook: the zip archive is "
                                f"damaged ({exc})") from None
    buffer.seek(0)
    return buffer
