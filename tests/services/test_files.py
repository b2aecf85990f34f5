"""Data files: streamed SHA-256, registration by path and by upload, refusals, verification."""

from __future__ import annotations

import hashlib
import io
import os
from collections.abc import Callable
from pathlib import Path

import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.errors import InvalidInput
from curation.model import DataFile, Item, Person
from curation.services import files

# FIPS 180-2, Appendix B (SHA-256 examples): one block, two blocks, one million 'a'.
FIPS_180_2 = [
    (b"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"),
    (b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
     "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"),
    (b"a" * 1_000_000, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"),
]


@pytest.mark.parametrize(("message", "expected"), FIPS_180_2)
def test_streamed_hash_matches_fips_180_2(message: bytes, expected: str,
                                          monkeypatch: pytest.MonkeyPatch) -> None:
    # hashlib itself must agree with the standard, and so must our chunked reading of a
    # stream whose chunks straddle the 64-byte blocks.
    assert hashlib.sha256(message).hexdigest() == expected
    monkeypatch.setattr(files, "CHUNK", 7)
    sink = io.BytesIO()
    assert files.sha256_stream(io.BytesIO(message), sink) == (expected, len(message))
    assert sink.getvalue() == message


@pytest.fixture
def share(tmp_path: Path) -> Path:
    folder = tmp_path / "share"
    folder.mkdir()
    return folder


def _write(folder: Path, name: str, data: bytes) -> Path:
    path = folder / name
    path.write_bytes(data)
    return path


def test_register_by_path_records_size_mtime_name_and_step(
        session: Session, operator: Person, make_item: Callable[..., Item],
        make_event: Callable[..., object], share: Path) -> None:
    item = make_item()
    step = make_event(item, 1, technique="sem-imaging")
    path = _write(share, "scan_001.tif", b"\x00" * 5000)
    os.utime(path, (1_700_000_000, 1_700_000_000))
    df = files.register_path(session, actor=operator, item=item, path=str(path), step=step,
                             roots=[share])
    assert (df.size_bytes, df.original_name, df.technique, df.event_id) == (
        5000, "scan_001.tif", "sem-imaging", step.id)
    assert df.sha256 == hashlib.sha256(b"\x00" * 5000).hexdigest()
    assert df.modified_at.timestamp() == 1_700_000_000 and not df.is_upload
    again = files.register_path(session, actor=operator, item=item, path=str(path),
                                roots=[share])
    assert again.id == df.id


def test_same_content_on_another_item_is_refused_naming_both(
        session: Session, operator: Person, make_item: Callable[..., Item], share: Path) -> None:
    first, second = make_item(code="DF-ONE"), make_item(code="DF-TWO")
    files.register_path(session, actor=operator, item=first,
                        path=str(_write(share, "a.dat", b"same")), roots=[share])
    copy = _write(share, "copy.dat", b"same")
    with pytest.raises(files.DuplicateFile) as refused:
        files.register_path(session, actor=operator, item=second, path=str(copy), roots=[share])
    assert "DF-ONE" in str(refused.value) and "DF-TWO" in str(refused.value)
    with pytest.raises(files.DuplicateFile, match="DF-ONE"):
        files.upload(session, actor=operator, item=second, stream=io.BytesIO(b"same"),
                     original_name="again.dat")


@pytest.mark.parametrize("bad", ["relative/file.dat", "{share}/../share/a.dat", "{share}/a\x00.dat",
                                 "", "{share}", "/dev/zero", "{share}/missing.dat"])
def test_bad_paths_are_refused(bad: str, session: Session, operator: Person,
                               make_item: Callable[..., Item], share: Path) -> None:
    _write(share, "a.dat", b"x")
    with pytest.raises(InvalidInput) as refused:
        files.register_path(session, actor=operator, item=make_item(),
                            path=bad.format(share=share), roots=[])
    assert refused.value.field == "path"


def test_paths_outside_the_roots_and_escaping_links_are_refused(
        session: Session, operator: Person, make_item: Callable[..., Item], share: Path,
        tmp_path: Path) -> None:
    outside = _write(tmp_path, "secret.dat", b"not for the share")
    link = share / "link.dat"
    link.symlink_to(outside)
    for path in (outside, link):
        with pytest.raises(InvalidInput, match="inside"):
            files.register_path(session, actor=operator, item=make_item(), path=str(path),
                                roots=[share])
    assert files.data_roots({"CURATION_DATA_ROOTS": f"/a{os.pathsep}/b"}) == [Path("/a"),
                                                                           Path("/b")]


@pytest.mark.parametrize("name", ["../evil.png", "a/b.png", "..\\evil.png", "C:\\x\\y.png",
                                  "..", "", "tab\there.png"])
def test_upload_names_that_are_paths_are_refused(
        name: str, session: Session, operator: Person, make_item: Callable[..., Item],
        tmp_path: Path) -> None:
    with pytest.raises(InvalidInput) as refused:
        files.upload(session, actor=operator, item=make_item(), stream=io.BytesIO(b"x"),
                     original_name=name, home=tmp_path)
    assert refused.value.field == "file"
    assert not any((tmp_path / "uploads").glob("*")) if (tmp_path / "uploads").exists() else True


def test_upload_is_stored_by_hash(session: Session, operator: Person,
                                  make_item: Callable[..., Item], tmp_path: Path) -> None:
    data = b"spectrum\n" * 1000
    df = files.upload(session, actor=operator, item=make_item(), stream=io.BytesIO(data),
                      original_name="eds map.csv", technique="EDS", home=tmp_path)
    sha = hashlib.sha256(data).hexdigest()
    assert Path(df.path) == tmp_path / "uploads" / sha and Path(df.path).read_bytes() == data
    assert (df.sha256, df.size_bytes, df.technique, df.media_type, df.is_upload) == (
        sha, len(data), "eds", "text/csv", True)
    assert [p.name for p in (tmp_path / "uploads").iterdir()] == [sha]


def test_a_step_on_another_item_is_refused(session: Session, operator: Person,
                                           make_item: Callable[..., Item],
                                           make_event: Callable[..., object],
                                           tmp_path: Path) -> None:
    other = make_event(make_item(), 1)
    with pytest.raises(InvalidInput, match="a step recorded on"):
        files.upload(session, actor=operator, item=make_item(), stream=io.BytesIO(b"y"),
                     original_name="y.dat", step=other, home=tmp_path)
    assert [p.name for p in (tmp_path / "uploads").iterdir()] == []


def test_verify_names_missing_and_changed(session: Session, operator: Person,
                                         make_item: Callable[..., Item], share: Path) -> None:
    item = make_item()
    kept, changed, gone = (_write(share, n, n.encode()) for n in ("kept", "changed", "gone"))
    for path in (kept, changed, gone):
        files.register_path(session, actor=operator, item=item, path=str(path), roots=[share])
    changed.write_bytes(b"edited after registration")
    gone.unlink()
    mine = {c.data_file.original_name: c for c in files.verify(session)
            if c.data_file.item_id == item.id}
    assert {n: c.status for n, c in mine.items()} == {"kept": "ok", "changed": "changed",
                                                      "gone": "missing"}
    assert mine["changed"].sha256_now == hashlib.sha256(b"edited after registration").hexdigest()
    assert session.scalars(select(DataFile).where(DataFile.item_id == item.id)).all()
