"""Data files: register one where the instrument wrote it, or store an upload; verify them all.

Hashes are computed by streaming in chunks, so a file of many gigabytes never sits in memory.
A file's SHA-256 binds it to one item: the same content registered for another item is refused
with both items named, because one of the two records would then be wrong.
"""

from __future__ import annotations

import hashlib
import mimetypes
import os
import secrets
import stat
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path, PurePosixPath, PureWindowsPath
from typing import BinaryIO

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from curation import config, ledger, techniques
from curation.errors import InvalidInput, RuleViolation
from curation.model import DataFile, Event, EventKind, Item, Person

#: bytes read at a time while hashing or copying
CHUNK = 1 << 20
#: folders where registered paths may lie, separated like PATH (none set: any absolute path)
ROOTS_ENV = "CURATION_DATA_ROOTS"
#: pseudo file systems whose "files" are devices or the kernel's memory, never data
SYSTEM_TREES = (Path("/proc"), Path("/sys"), Path("/dev"))
MAX_NAME = 255


class DuplicateFile(RuleViolation):
    """Content already registered for another item."""


@dataclass(frozen=True)
class Received:
    """An upload streamed to a temporary file in the store, with its hash and size."""

    temp: Path
    sha256: str
    size_bytes: int


def data_roots(environ: Mapping[str, str] | None = None) -> list[Path]:
    """The folders registered paths must lie in (CURATION_DATA_ROOTS); empty when unset."""
    return config.data_roots(environ)


def store_folder(kind: str, home: Path | None = None) -> Path:
    """A folder of the data folder (uploads, thumbnails, previews), created when missing."""
    folder = (home or config.home()) / kind
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def sha256_stream(stream: BinaryIO, sink: BinaryIO | None = None) -> tuple[str, int]:
    """Hex SHA-256 and length of a stream read in chunks, copied to `sink` if given."""
    digest, size = hashlib.sha256(), 0
    while chunk := stream.read(CHUNK):
        digest.update(chunk)
        size += len(chunk)
        if sink is not None:
            sink.write(chunk)
    return digest.hexdigest(), size


def sha256_file(path: Path) -> tuple[str, int]:
    """Hex SHA-256 and size of a file, streamed."""
    with path.open("rb") as stream:
        return sha256_stream(stream)


def check_name(name: str) -> str:
    """An upload's file name as sent, refused when it is a path or could act as one."""
    bare = PurePosixPath(name).name == name and PureWindowsPath(name).name == name
    if (not name or len(name) > MAX_NAME or not bare or name in (".", "..")
            or any(ord(c) < 32 for c in name)):
        raise InvalidInput("file", name, "a plain file name without folders, '..' or "
                           f"control characters, at most {MAX_NAME} characters")
    return name


def check_path(text: str, roots: Sequence[Path] = ()) -> Path:
    """An absolute path to a regular file, inside one of `roots` when any are set."""
    allowed = "an absolute path to a file without '..'" + (
        " inside " + " or ".join(str(r) for r in roots) if roots else "")
    if not text or "\x00" in text or not os.path.isabs(text) or ".." in Path(text).parts:
        raise InvalidInput("path", text, allowed)
    # Resolve links first: a link inside a root may point anywhere.
    real = Path(os.path.realpath(text))
    if any(real.is_relative_to(t) for t in SYSTEM_TREES) or (
            roots and not any(real.is_relative_to(os.path.realpath(r)) for r in roots)):
        raise InvalidInput("path", text, allowed)
    try:
        mode = real.stat().st_mode
    except OSError as exc:
        raise InvalidInput("path", text, f"a file that exists and can be read ({exc.strerror})"
                           ) from exc
    if not stat.S_ISREG(mode):
        raise InvalidInput("path", text, "a regular file (not a folder or a device)")
    return real


def _technique(technique: str | None, step: Event | None) -> str | None:
    if technique:
        return techniques.get(technique).code
    return step.technique if step is not None else None


def _check_step(item: Item, step: Event | None) -> None:
    if step is not None and (step.kind != EventKind.STEP.value or step.item_id != item.id):
        raise InvalidInput("step", step.id, f"a step recorded on {item.code}")


def _bound(session: Session, item: Item, sha256: str) -> DataFile | None:
    """The file with this hash already on the item; DuplicateFile when on another item."""
    found = session.scalars(select(DataFile).where(DataFile.sha256 == sha256)
                            .options(joinedload(DataFile.item)).order_by(DataFile.id)).all()
    for other in found:
        if other.item_id != item.id:
            raise DuplicateFile(
                f"this content (SHA-256 {sha256[:16]}…) is already registered for item "
                f"{other.item.code} as {other.original_name!r}; it cannot also belong to "
                f"{item.code}")
    return found[0] if found else None


def _record(session: Session, actor: Person, item: Item, **fields: object) -> DataFile:
    data_file = DataFile(item_id=item.id, actor_id=actor.id, **fields)
    session.add(data_file)
    session.flush()
    return data_file


def register_path(
    session: Session, *, actor: Person, item: Item, path: str, technique: str | None = None,
    step: Event | None = None, roots: Sequence[Path] | None = None,
) -> DataFile:
    """Register a file where the instrument wrote it; the same file again returns its record."""
    ledger.attribute(session, actor)
    _check_step(item, step)
    code = _technique(technique, step)
    real = check_path(path, data_roots() if roots is None else roots)
    sha, size = sha256_file(real)
    existing = _bound(session, item, sha)
    if existing is not None and existing.path == str(real):
        return existing
    modified = datetime.fromtimestamp(real.stat().st_mtime, tz=UTC)
    return _record(session, actor, item, event_id=step.id if step else None, path=str(real),
                   original_name=real.name, size_bytes=size, sha256=sha, modified_at=modified,
                   technique=code, media_type=media_type(real.name), is_upload=False)


def media_type(name: str) -> str:
    """The media type a file name suggests, else application/octet-stream."""
    return mimetypes.guess_type(name)[0] or "application/octet-stream"


def receive(stream: BinaryIO, home: Path | None = None) -> Received:
    """Stream an upload into a temporary file of the upload store while hashing it."""
    temp = store_folder("uploads", home) / f".incoming-{secrets.token_hex(8)}"
    with temp.open("xb") as sink:
        sha, size = sha256_stream(stream, sink)
    return Received(temp, sha, size)


def keep_upload(
    session: Session, *, actor: Person, item: Item, received: Received, original_name: str,
    technique: str | None = None, step: Event | None = None, home: Path | None = None,
) -> DataFile:
    """Move a received upload into the store (named by its hash) and register it."""
    ledger.attribute(session, actor)
    try:
        check_name(original_name)
        _check_step(item, step)
        code = _technique(technique, step)
        existing = _bound(session, item, received.sha256)
    except BaseException:
        received.temp.unlink(missing_ok=True)
        raise
    target = store_folder("uploads", home) / received.sha256
    # Content-addressed: a file already there holds the same bytes.
    os.replace(received.temp, target)
    if existing is not None:
        return existing
    return _record(session, actor, item, event_id=step.id if step else None, path=str(target),
                   original_name=original_name, size_bytes=received.size_bytes,
                   sha256=received.sha256, modified_at=None, technique=code,
                   media_type=media_type(original_name), is_upload=True)


def upload(
    session: Session, *, actor: Person, item: Item, stream: BinaryIO, original_name: str,
    technique: str | None = None, step: Event | None = None, home: Path | None = None,
) -> DataFile:
    """Store an uploaded file in the upload store and register it."""
    check_name(original_name)
    received = receive(stream, home)
    return keep_upload(session, actor=actor, item=item, received=received,
                       original_name=original_name, technique=technique, step=step, home=home)


@dataclass(frozen=True)
class FileCheck:
    """One registered file re-hashed: ok, missing or changed."""

    data_file: DataFile
    status: str
    sha256_now: str | None = None
    size_now: int | None = None


def check_file(data_file: DataFile) -> FileCheck:
    """Re-hash one registered file and compare it with its record."""
    path = Path(data_file.path)
    try:
        sha, size = sha256_file(path)
    except (FileNotFoundError, NotADirectoryError, IsADirectoryError, PermissionError):
        return FileCheck(data_file, "missing")
    status = "ok" if sha == data_file.sha256 and size == data_file.size_bytes else "changed"
    return FileCheck(data_file, status, sha, size)


def verify(session: Session) -> list[FileCheck]:
    """Every registered file re-hashed, in registration order (items loaded in one query)."""
    rows = session.scalars(select(DataFile).options(joinedload(DataFile.item))
                           .order_by(DataFile.id)).all()
    return [check_file(f) for f in rows]


def files_of(session: Session, item_ids: Iterable[int]) -> list[DataFile]:
    """The data files of these items, oldest first, in one query."""
    return list(session.scalars(select(DataFile).where(DataFile.item_id.in_(sorted(item_ids)))
                                .order_by(DataFile.registered_at, DataFile.id)))
