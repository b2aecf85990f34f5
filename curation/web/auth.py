"""Login, logout, and the one table of which roles may reach each page.

`ACCESS` maps every endpoint to the roles allowed; `require_login` (a before_request hook)
enforces it. Rules that depend on the item or the station are checked by `may_write` in the
views, before their one service call (the rules themselves live in curation.services.access).
"""

from __future__ import annotations

import time
from collections import defaultdict, deque
from collections.abc import Sequence
from urllib.parse import urlsplit

from flask import (
    Blueprint,
    Flask,
    abort,
    current_app,
    flash,
    g,
    redirect,
    render_template,
    request,
    session,
    url_for,
)
from flask_wtf import FlaskForm
from werkzeug.wrappers import Response
from wtforms import PasswordField, StringField
from wtforms.validators import InputRequired, Length

from curation import ledger
from curation.model import Item, Person, Station
from curation.services import access, accounts
from curation.web.app import db_session

bp = Blueprint("auth", __name__)

EVERYONE = frozenset(accounts.ROLES)
STAFF = frozenset({"admin", "curator"})
#: who may record on items; analysts and stations further limited by `may_write`
ITEM_WRITERS = STAFF | {"analyst", "station"}
#: open without a login
PUBLIC = frozenset({"auth.login", "static", "api.openapi_document"})
#: the JSON API authenticates each request with a station's bearer token instead
TOKEN = frozenset({"api.get_item", "api.get_technique", "api.post_file", "api.post_step"})
#: pages every role may read
_READ = (
    "allocations.allocation_page", "allocations.dashboard", "allocations.report_csv",
    "allocations.report_page", "allocations.report_pdf", "controls.controls_page",
    "controls.controls_pdf_file", "controls.reading_for", "controls.study_list", "custody.desk",
    "custody.environment_page", "custody.environment_place", "custody.scan", "files.files_page",
    "files.image_page", "files.label_page", "files.label_png", "files.preview", "files.thumbnail",
    "findings.finding_list", "findings.finding_page", "items.event_page", "items.home",
    "items.item_list", "items.item_page", "reports.budget_plot", "reports.lineage_page",
    "reports.lineage_pdf_file", "reports.lineage_zip_file", "stations.station_list",
    "stations.station_page", "auth.logout",
)
#: endpoint → roles allowed; an endpoint missing here is refused to everyone
ACCESS: dict[str, frozenset[str]] = {
    **dict.fromkeys(_READ, EVERYONE),
    "allocations.record": STAFF,
    "controls.record_reading": STAFF,
    "custody.record": STAFF | {"analyst"},
    "custody.record_reading": STAFF,
    "files.add_file": ITEM_WRITERS,
    "findings.dispose": STAFF | {"auditor"},
    "stations.record": ITEM_WRITERS,
}
#: failed logins allowed per account and per address within WINDOW seconds
PER_ACCOUNT, PER_ADDRESS, WINDOW = 5, 20, 15 * 60
USER_KEY = "user_id"


class LoginForm(FlaskForm):
    """Username and password."""

    username = StringField("Username", validators=[InputRequired(), Length(max=64)],
                           render_kw={"autocomplete": "username", "autofocus": True})
    password = PasswordField("Password", validators=[InputRequired(), Length(max=200)],
                             render_kw={"autocomplete": "current-password"})


class Attempts:
    """Failed logins per key in a sliding time window (in this process)."""

    def __init__(self) -> None:
        self.failures: dict[str, deque[float]] = defaultdict(deque)

    def count(self, key: str, now: float) -> int:
        """Failures of `key` within the window."""
        times = self.failures[key]
        while times and times[0] <= now - WINDOW:
            times.popleft()
        return len(times)

    def fail(self, *keys: str) -> None:
        """Note a failed attempt under each key."""
        for key in keys:
            self.failures[key].append(time.monotonic())


def install(app: Flask) -> None:
    """Register the login pages, the access check and the attempt counter on `app`."""
    app.extensions["curation.attempts"] = Attempts()
    app.before_request(require_login)
    app.jinja_env.globals["may"] = may
    app.register_blueprint(bp)


def current_user() -> Person | None:
    """The logged-in person of this request (active, with a role), or None."""
    if "user" not in g:
        user_id = session.get(USER_KEY)
        person = db_session().get(Person, user_id) if isinstance(user_id, int) else None
        g.user = person if person is not None and person.is_active and person.role else None
        if g.user is not None:
            db_session().info[ledger.AUTHENTICATED_KEY] = g.user.username
    user: Person | None = g.user
    return user


def may(endpoint: str) -> bool:
    """Whether the logged-in person's role may reach `endpoint` (pages hide what it may not)."""
    user = current_user()
    return user is not None and user.role in ACCESS.get(endpoint, ())


def require_login() -> Response | None:
    """Send visitors to the login page and refuse roles the endpoint's rule leaves out."""
    endpoint = request.endpoint
    if endpoint is None or endpoint in PUBLIC or endpoint in TOKEN:
        return None
    user = current_user()
    if user is None:
        return redirect(url_for("auth.login", next=request.full_path.rstrip("?")))
    if user.role not in ACCESS.get(endpoint, ()):
        abort(403, "Your account's role may not open this page or make this change.")
    return None


def may_write(items: Sequence[Item] = (), station: Station | None = None) -> None:
    """Refuse (403) a write the account may not make: analysts write only to items of their
    allocations; a station account writes at its own instrument (or to items it worked on)."""
    user = current_user()
    assert user is not None  # require_login ran first
    session = db_session()
    allowed = station is None or access.may_use_station(session, user, station)
    if not (user.role == "station" and station is not None):
        allowed = allowed and all(access.may_write_item(session, user, it) for it in items)
    if not allowed:
        abort(403, f"{user.username} ({user.role}) may not write here: analysts write only to "
                   "items of their allocations, stations only for their own instrument.")


def local_path(target: str | None) -> str:
    """`target` when it is a path on this site, else the home page (no open redirects)."""
    parts = urlsplit(target or "")
    if not target or parts.scheme or parts.netloc or not target.startswith("/") \
            or target.startswith("//") or "\\" in target:
        return url_for("items.home")
    return target


@bp.route("/login", methods=["GET", "POST"])
def login() -> Response | str | tuple[str, int]:
    """The login form; a correct password starts a fresh session."""
    form = LoginForm()
    attempts: Attempts = current_app.extensions["curation.attempts"]
    if form.validate_on_submit():
        keys = (f"user:{form.username.data}", f"addr:{request.remote_addr}")
        now = time.monotonic()
        if attempts.count(keys[0], now) >= PER_ACCOUNT or attempts.count(keys[1], now) >= PER_ADDRESS:
            return render_template("auth/login.html", form=form, limited=True), 429
        try:
            person = accounts.authenticate(db_session(), form.username.data or "",
                                           form.password.data or "")
        except accounts.LoginRefused as exc:
            attempts.fail(*keys)
            form.form_errors.append(str(exc))
            # 200, not 4xx: the form is simply shown again, as after a typo.
            return render_template("auth/login.html", form=form)
        # A new session at login: nothing set before it (by anyone) carries over.
        session.clear()
        session[USER_KEY] = person.id
        flash(f"Logged in as {person.name} ({person.username}, {person.role}).")
        return redirect(local_path(request.args.get("next")))
    return render_template("auth/login.html", form=form)


@bp.route("/logout", methods=["POST"])
def logout() -> Response:
    """End the session."""
    session.clear()
    flash("Logged out.")
    return redirect(url_for("auth.login"))
