"""The files page, image uploads, thumbnails and their headers, the label page, 413."""

from __future__ import annotations

import io
from collections.abc import Callable
from pathlib import Path
from typing import Any

import zxingcpp
from flask.testing import FlaskClient
from PIL import Image
from sqlalchemy import event
from sqlalchemy.orm import Session

from curation import create_app
from curation.model import Item, Person
from curation.services import files
from tests.services.test_images import encoded, gradient16
from tests.web.conftest import logged_in


def _image_post(client: FlaskClient, code: str, operator: Person, data: io.BytesIO,
                name: str, **fields: Any) -> Any:
    form = {"image-operator": operator.username, "image-file": (data, name)}
    form.update({f"image-{k}": v for k, v in fields.items()})
    return client.post(f"/items/{code}/files/image", data=form,
                       content_type="multipart/form-data")


def test_upload_image_then_item_page_shows_thumbnail(
        client: FlaskClient, operator: Person, make_item: Callable[..., Item]) -> None:
    item = make_item()
    answer = _image_post(client, item.code, operator, encoded(gradient16(), "TIFF"), "g.tif",
                         pixel_size_nm="12.5")
    assert answer.status_code == 302, answer.text
    page = client.get(f"/items/{item.code}/files").text
    assert "g.tif" in page and "16-bit" in page and "12.5 nm (as entered)" in page
    item_page = client.get(f"/items/{item.code}").text
    assert "/thumbnail.png" in item_page
    file_id = item_page.split("/thumbnail.png")[0].rsplit("/files/", 1)[1]
    assert "/preview.png" in client.get(f"/files/{file_id}").text
    thumb = client.get(f"/files/{file_id}/thumbnail.png")
    assert thumb.status_code == 200 and thumb.mimetype == "image/png"
    assert thumb.headers["Content-Disposition"].startswith("inline")
    assert thumb.headers["X-Content-Type-Options"] == "nosniff"
    assert "sandbox" in thumb.headers["Content-Security-Policy"]
    with Image.open(io.BytesIO(thumb.data)) as picture:
        assert picture.getextrema() == (0, 255)
    assert client.get(f"/files/{file_id}/preview.png").status_code == 200


def test_non_image_comes_back_with_the_message_beside_the_field(
        client: FlaskClient, operator: Person, make_item: Callable[..., Item]) -> None:
    item = make_item()
    answer = _image_post(client, item.code, operator, io.BytesIO(b"not,an,image\n"), "x.png")
    assert answer.status_code == 400
    assert "a TIFF, PNG or JPEG image that can be read" in answer.text
    assert 'id="image-file-error"' in answer.text


def test_duplicate_upload_names_the_other_item(
        client: FlaskClient, operator: Person, make_item: Callable[..., Item]) -> None:
    first, second = make_item(code="WF-A"), make_item(code="WF-B")
    form = {"upload-operator": operator.username}
    for item in (first, second):
        answer = client.post(f"/items/{item.code}/files/upload",
                             data=form | {"upload-file": (io.BytesIO(b"same bytes"), "d.bin")},
                             content_type="multipart/form-data")
    assert answer.status_code == 400 and "already registered for item WF-A" in answer.text


def test_register_by_path(client: FlaskClient, operator: Person,
                          make_item: Callable[..., Item], tmp_path: Path) -> None:
    item, path = make_item(), tmp_path / "run_7.h5"
    path.write_bytes(b"\x89HDF\r\n" + b"\x00" * 100)
    answer = client.post(f"/items/{item.code}/files/path", data={
        "path-operator": operator.username, "path-path": str(path), "path-technique": "xct"})
    assert answer.status_code == 302, answer.text
    page = client.get(f"/items/{item.code}").text
    assert "run_7.h5" in page and "xct ·" in page
    bad = client.post(f"/items/{item.code}/files/path", data={
        "path-operator": operator.username, "path-path": f"{tmp_path}/../x"})
    assert bad.status_code == 400 and "without &#39;..&#39;" in bad.text


def test_oversized_upload_gets_a_clear_413(connection: Any, operator: Person, admin: Person,
                                           make_item: Callable[..., Item]) -> None:
    app = create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t",
                      "WTF_CSRF_ENABLED": False, "MAX_CONTENT_LENGTH": 2048})
    item = make_item()
    answer = _image_post(logged_in(app, admin), item.code, operator,
                         io.BytesIO(b"\x00" * 10_000), "big.png")
    assert answer.status_code == 413
    assert "File too large" in answer.text and "2 KiB" in answer.text
    assert "Nothing was saved" in answer.text


def test_label_page_and_png(client: FlaskClient, make_item: Callable[..., Item]) -> None:
    item = make_item(code="LBL-9", material="olivine")
    page = client.get("/items/LBL-9/label")
    assert page.status_code == 200 and "Print label" in page.text and "data-print" in page.text
    png = client.get("/items/LBL-9/label.png")
    assert png.headers["Content-Disposition"] == 'inline; filename="label-LBL-9.png"'
    with Image.open(io.BytesIO(png.data)) as picture:
        assert [r.text for r in zxingcpp.read_barcodes(picture)] == [item.code]
    assert client.get("/items/NOPE/label").status_code == 404


def test_item_page_file_queries_do_not_grow_with_files(
        client: FlaskClient, session: Session, operator: Person,
        make_item: Callable[..., Item], connection: Any, tmp_path: Path) -> None:
    def count(item: Item) -> int:
        seen: list[str] = []
        listener = lambda *args: seen.append(args[2])
        event.listen(connection, "before_cursor_execute", listener)
        try:
            assert client.get(f"/items/{item.code}").status_code == 200
        finally:
            event.remove(connection, "before_cursor_execute", listener)
        return len(seen)

    one, three = make_item(), make_item()
    for item, n in ((one, 1), (three, 3)):
        for k in range(n):
            files.upload(session, actor=operator, item=item, original_name=f"f{k}.bin",
                         stream=io.BytesIO(f"{item.code}-{k}".encode()), home=tmp_path)
    assert count(one) == count(three)
