"""Reading a big DXF one entity at a time, with ezdxf's ``iterdxf`` add-on.

ezdxf's full parse keeps every entity of the drawing as an object (about
1.3 GB for a million lines); ``iterdxf`` indexes the file and loads one
entity at a time, and is somewhat faster too.  It applies only to a drawing
whose model space it can give completely: an ASCII file whose ENTITIES
section holds only kinds ``iterdxf`` returns and no block references (their
blocks need the whole document).  Every other drawing, and any drawing where
streaming fails part-way, is read whole by :func:`spaceframe.io._dxf_read._open`
(with ezdxf's recover and audit); the streamed read skips the audit, which
repairs document structure (tables, pointers, handles) that the members do not
depend on: a damaged entity is still skipped and counted by the collector.
"""

from __future__ import annotations

import io as _io
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = ["STREAM_MIN_BYTES", "Streamed", "open_stream"]

#: Drawings of at least this size are streamed when they can be: below it the
#: whole document costs little and ezdxf's audit runs as well.
STREAM_MIN_BYTES = 8 * 2**20

#: Kinds that make up entities but are not listed by iterdxf as entities of their own.
_PARTS = frozenset({"VERTEX", "SEQEND", "ATTRIB", "ENDSEC"})


@dataclass
class Streamed:
    """An opened stream: the model-space entities and what the reader needs of the rest."""

    entities: Iterator[Any]
    insunits: int
    layer_names: dict[str, str]  # lower-case -> spelling in the layer table
    closer: Any

    def close(self) -> None:
        """Close the file."""
        self.closer.close()


def _section_tags(doc: Any, name: str) -> Iterator[Any]:
    """The (code, value) tags of one section, through ezdxf's own tag loader."""
    from ezdxf.lldxf.tagger import ascii_tags_loader

    if name not in doc.sections:
        return iter(())
    index = doc.structure.index
    start = doc.sections[name]
    end = start + 1
    while end < len(index) and index[end].value != "ENDSEC":
        end += 1
    doc.file.seek(index[start].location)
    data = doc.file.read(index[min(end, len(index) - 1)].location - index[start].location)
    text = data.decode(doc.encoding, errors="surrogateescape").replace("\r\n", "\n")
    return ascii_tags_loader(_io.StringIO(text))


def _insunits(doc: Any) -> int:
    tags = _section_tags(doc, "HEADER")
    for tag in tags:
        if tag.code == 9 and tag.value == "$INSUNITS":
            for value in tags:
                if value.code == 70:
                    return int(value.value)
                if value.code == 9:
                    break
    return 0


def _layer_names(doc: Any) -> dict[str, str]:
    names: dict[str, str] = {}
    in_layer = False
    for tag in _section_tags(doc, "TABLES"):
        if tag.code == 0:
            in_layer = tag.value == "LAYER"
        elif in_layer and tag.code == 2:
            names.setdefault(str(tag.value).lower(), str(tag.value))
            in_layer = False
    return names


def _entity_kinds(doc: Any) -> set[str]:
    index = doc.structure.index
    kinds = set()
    for entry in index[doc.sections["ENTITIES"] + 1:]:
        if entry.value == "ENDSEC":
            break
        kinds.add(entry.value)
    return kinds


def open_stream(path: Path, min_bytes: int | None = None) -> Streamed | None:
    """The streamed model space of ``path``, or None when it must be read whole.

    None for a file under ``min_bytes`` (default :data:`STREAM_MIN_BYTES`), a
    binary or damaged file (the index cannot be built), one whose ENTITIES
    section holds block references or kinds iterdxf does not return (it would
    pass them over without a word), and when ezdxf's add-on is missing.
    """
    limit = STREAM_MIN_BYTES if min_bytes is None else min_bytes
    try:
        if path.stat().st_size < limit:
            return None
        from ezdxf.addons import iterdxf
        from ezdxf.lldxf import validator

        if not validator.is_dxf_file(str(path)):
            return None  # binary DXF, or not DXF at all: the whole-file reader says which
        doc = iterdxf.opendxf(str(path))
    except Exception:
        # Anything here (a damaged structure, a missing add-on) means: read it whole.
        return None
    try:
        kinds = _entity_kinds(doc)
        if "INSERT" in kinds or kinds - set(iterdxf.SUPPORTED_TYPES) - _PARTS:
            doc.close()
            return None
        return Streamed(iter(doc.modelspace()), _insunits(doc), _layer_names(doc), doc)
    except Exception:
        doc.close()
        return None
