"""An item's data files and images: upload, register by path, thumbnails, the label page.

Each write is form → validate → one service call → flash → redirect.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from flask import Blueprint, Response, abort, current_app, flash, redirect, render_template, url_for
from flask_wtf import FlaskForm
from flask_wtf.file import FileField, FileRequired
from sqlalchemy import select
from sqlalchemy.orm import Session
from werkzeug.exceptions import RequestEntityTooLarge
from werkzeug.wrappers import Response as BaseResponse
from wtforms import FloatField, SelectField, StringField
from wtforms.validators import InputRequired, Length, NumberRange, Optional

from curation import techniques
from curation.errors import CurationError
from curation.model import Event, EventKind, Image, Item, Person
from curation.reports import labels
from curation.services import files, images
from curation.services.common import item_by_code, person_by_username
from curation.web import forms as f
from curation.web.app import db_session
from curation.web.auth import may_write

bp = Blueprint("files", __name__)

#: headers for images the app serves: shown inline, never sniffed, never run as a page
IMAGE_HEADERS = {"Content-Security-Policy": "default-src 'none'; sandbox",
                 "Cache-Control": "private, max-age=86400"}
_REQUIRED = "required: enter or choose a value"


def _technique_choices() -> list[Any]:
    return [f.choice("", "— not given —"),
            *(f.choice(t.code, f"{t.label} ({t.code})") for t in techniques.TECHNIQUES.values())]


class _FileForm(FlaskForm):
    operator = f.operator_field()
    technique = SelectField("Technique", validators=[Optional()])
    step = SelectField("Step that produced it", validators=[Optional()])


class ImageForm(_FileForm):
    file = FileField("Image (TIFF, PNG or JPEG)",
                     validators=[FileRequired(message="required: choose the image file")],
                     description="8- or 16-bit. A TIFF's resolution tags give the pixel size.")
    pixel_size_nm = FloatField(
        "Pixel size (nm)", validators=[Optional(), NumberRange(min=1e-6, message="above 0")],
        description="Used for the scale bar when the file has no resolution tags.")


class UploadForm(_FileForm):
    file = FileField("Data file", validators=[FileRequired(message="required: choose the file")])


class PathForm(_FileForm):
    path = StringField("Path on the instrument share",
                       validators=[InputRequired(message=_REQUIRED), Length(max=1000)],
                       description="Absolute path; the file stays there and is hashed in place.")


FORMS: dict[str, tuple[type[_FileForm], str]] = {
    "image": (ImageForm, "Upload an image"),
    "upload": (UploadForm, "Upload a data file"),
    "path": (PathForm, "Register a file by path"),
}


def _steps(session: Session, item: Item) -> list[Any]:
    rows = session.execute(select(Event.id, Event.technique, Event.occurred_at).where(
        Event.item_id == item.id, Event.kind == EventKind.STEP.value).order_by(Event.occurred_at))
    return [f.choice("", "— none —"), *(f.choice(str(i), f"#{i} {t} at {a:%Y-%m-%d %H:%M}")
                                        for i, t, a in rows)]


def file_forms(session: Session, item: Item, posted: str | None = None) -> dict[str, FlaskForm]:
    """The three file forms, choices filled; only the posted one reads the request."""
    people, steps, kinds = f.operator_choices(session), _steps(session, item), _technique_choices()
    built = {}
    for name, (form_class, _) in FORMS.items():
        form = form_class(prefix=name, **({} if name == posted else {"formdata": None}))
        form.operator.choices, form.step.choices, form.technique.choices = people, steps, kinds
        built[name] = form
    return built


def _page(session: Session, item: Item, forms: dict[str, FlaskForm], status: int = 200
          ) -> tuple[str, int]:
    return render_template("files/files.html", item=item, forms=forms, titles=FORMS,
                           rows=images.files_with_images(session, item.id),
                           limit=size_words(_limit())), status


def _limit() -> int:
    return int(current_app.config.get("MAX_CONTENT_LENGTH") or 0)


@bp.app_template_filter("bytes")
def size_words(n: int) -> str:
    """A byte count as people read it: 512 bytes, 12.5 KiB, 256 MiB, 3.1 GiB."""
    for unit, size in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{n} bytes"


def _step(session: Session, form: _FileForm) -> Event | None:
    return session.get(Event, int(form.step.data)) if form.step.data else None


def _write_image(s: Session, item: Item, actor: Person, form: Any) -> str:
    upload = form.file.data
    image = images.add_image(s, actor=actor, item=item, stream=upload.stream,
                             original_name=upload.filename or "", step=_step(s, form),
                             pixel_size_nm=form.pixel_size_nm.data,
                             technique=form.technique.data or None)
    source = {"tiff-tags": "from the TIFF tags", "entered": "as entered"}.get(
        image.pixel_size_source or "", "unknown: no scale bar")
    return f"Image {upload.filename} added ({image.width_px} × {image.height_px} px, " \
           f"{image.bit_depth}-bit; pixel size {source})"


def _write_upload(s: Session, item: Item, actor: Person, form: Any) -> str:
    upload = form.file.data
    kept = files.upload(s, actor=actor, item=item, stream=upload.stream,
                        original_name=upload.filename or "", step=_step(s, form),
                        technique=form.technique.data or None)
    return f"File {kept.original_name} stored ({kept.size_bytes} bytes, SHA-256 {kept.sha256})"


def _write_path(s: Session, item: Item, actor: Person, form: Any) -> str:
    kept = files.register_path(s, actor=actor, item=item, path=form.path.data.strip(),
                               step=_step(s, form), technique=form.technique.data or None)
    return f"File {kept.path} registered ({kept.size_bytes} bytes, SHA-256 {kept.sha256})"


WRITERS: dict[str, Callable[[Session, Item, Person, Any], str]] = {
    "image": _write_image, "upload": _write_upload, "path": _write_path,
}


@bp.get("/items/<code>/files")
def files_page(code: str) -> tuple[str, int]:
    """An item's data files and images, with the forms to add more."""
    session = db_session()
    item = item_by_code(session, code)
    return _page(session, item, file_forms(session, item))


@bp.post("/items/<code>/files/<kind>")
def add_file(code: str, kind: str) -> BaseResponse | tuple[str, int]:
    """Add an image, an uploaded file or a file by path, then show the files again."""
    if kind not in WRITERS:
        abort(404)
    session = db_session()
    item = item_by_code(session, code)
    may_write([item])
    forms = file_forms(session, item, posted=kind)
    form = forms[kind]
    if not form.validate_on_submit():
        return _page(session, item, forms, 400)
    try:
        said = WRITERS[kind](session, item, person_by_username(session, form.operator.data), form)
    except CurationError as exc:
        f.attach_error(form, exc, {"pixel_size_nm": "pixel_size_nm"})
        return _page(session, item, forms, 400)
    flash(said)
    return redirect(url_for("files.files_page", code=code, _anchor="files"))


@bp.errorhandler(RequestEntityTooLarge)
def too_large(_exc: RequestEntityTooLarge) -> tuple[str, int]:
    """An upload over the limit: say the limit, keep nothing."""
    return render_template(
        "errors/error.html", status=413, title="File too large",
        message=f"The upload is larger than this server accepts ({size_words(_limit())}). "
                "Nothing was saved. Register a large data file by its path on the instrument "
                "share instead, or reduce the image before uploading it."), 413


def _rendition(file_id: int, kind: str) -> Response:
    row = db_session().scalar(select(Image).where(Image.data_file_id == file_id))
    if row is None:
        abort(404)
    sha = row.thumbnail_sha256 if kind == "thumbnails" else row.preview_sha256
    path = images.rendition_path(kind, sha)
    if not path.is_file():
        abort(404)
    # Thumbnails and previews are small: read whole, so no file handle outlives the request.
    return png_response(path.read_bytes(), f"{kind[:-1]}-{file_id}.png", etag=sha)


def png_response(data: bytes, filename: str, etag: str | None = None) -> Response:
    """A PNG shown inline under a safe name, never sniffed or run as a page."""
    response = Response(data, mimetype="image/png")
    response.headers["Content-Disposition"] = f'inline; filename="{_ascii(filename)}"'
    response.headers.update(IMAGE_HEADERS)
    if etag:
        response.set_etag(etag)
    return response


@bp.get("/files/<int:file_id>")
def image_page(file_id: int) -> str:
    """One image's preview with its scale bar, and its facts."""
    session = db_session()
    row = session.scalar(select(Image).where(Image.data_file_id == file_id))
    if row is None:
        abort(404)
    return render_template("files/image.html", image=row, df=row.data_file,
                           item=row.data_file.item)


@bp.get("/files/<int:file_id>/thumbnail.png")
def thumbnail(file_id: int) -> Response:
    """The image's 8-bit thumbnail."""
    return _rendition(file_id, "thumbnails")


@bp.get("/files/<int:file_id>/preview.png")
def preview(file_id: int) -> Response:
    """The image's preview with its scale bar."""
    return _rendition(file_id, "previews")


@bp.get("/items/<code>/label")
def label_page(code: str) -> str:
    """The item's label, ready to print."""
    label = labels.labels_for(db_session(), [code])[0]
    return render_template("files/label.html", label=label)


@bp.get("/items/<code>/label.png")
def label_png(code: str) -> Response:
    """The item's label as a PNG at 300 dpi."""
    label = labels.labels_for(db_session(), [code])[0]
    return png_response(labels.label_png(label), f"label-{code}.png")


def _ascii(name: str) -> str:
    # Codes are letters, digits, '-', '_' and '.' already; keep the header safe regardless.
    return "".join(c for c in name if c.isascii() and (c.isalnum() or c in "-_."))
