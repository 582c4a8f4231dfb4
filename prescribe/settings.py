"""Settings: where the store lives and the clinic's name and contact.

Resolution order for the store: ``--db`` on the command line, then the environment
variable ``PRESCRIBE_DB`` (a path or a database URL), then the default
``~/.local/share/prescribe/prescribe.db`` (``$XDG_DATA_HOME/prescribe/prescribe.db``).

The clinic shown on handouts comes from ``PRESCRIBE_CLINIC_NAME`` and
``PRESCRIBE_CLINIC_CONTACT``, or a TOML file with a ``[clinic]`` table (``name``,
``contact``): the file named by ``PRESCRIBE_SETTINGS``, else the default
``~/.config/prescribe/settings.toml`` (``$XDG_CONFIG_HOME/prescribe/settings.toml``).
Without either, handouts say the clinic is not set, and the app asks for the name and
contact once (:func:`save_clinic` writes them to that same file).

Who is working, and in which role (see docs/deploy.md):

* :func:`current_clinician` is the login from ``JUPYTERHUB_USER`` when the app runs
  under JupyterHub; a different name given explicitly is refused (never silently
  replaced), so the audit log, program versions, sessions and template approvals
  record the login.  Without a hub (the single-user ``prescribe app`` and the command
  line) it is the free-text name given with ``--clinician``.
* :func:`clinician_role` is ``"lead"`` or ``"clinician"``.  A clinic lead may approve
  templates; a clinician may not (:func:`require_role`).  Leads are named by the hub
  (``PRESCRIBE_HUB_ROLE=lead``, which deploy/jupyterhub_config.py sets for hub admins
  and members of the ``clinic-leads`` group) or by the clinic settings: the
  ``[roles] leads = [...]`` list of the ``PRESCRIBE_SETTINGS`` file, or the
  comma-separated ``PRESCRIBE_CLINIC_LEADS``.  Everyone else is a clinician.
"""

from __future__ import annotations

import datetime as _dt
import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError, NotPermittedError
from .identifiers import check_identifier

#: Environment variables the hub sets for each clinician's server.
HUB_USER_ENV = "JUPYTERHUB_USER"
HUB_ROLE_ENV = "PRESCRIBE_HUB_ROLE"
LEADS_ENV = "PRESCRIBE_CLINIC_LEADS"
ROLES = ("lead", "clinician")
#: What each role may do beyond the common work (saving people, programs, sessions).
ROLE_ACTIONS = {"approve_template": "lead", "retire_template": "lead", "set_passphrase": "lead"}
MAX_CLINICIAN_LEN = 200


def default_db_path() -> Path:
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "prescribe" / "prescribe.db"


def db_url(explicit: str | None = None) -> str:
    """The SQLAlchemy URL of the store: ``--db``, then ``PRESCRIBE_DB``, then the default.

    A SQLite store named by ``--db`` or ``PRESCRIBE_DB`` must be in a folder that exists
    (:class:`InputError` naming the option and the path otherwise): a mistyped folder never
    becomes a new, empty store elsewhere.  Only the default location's folder is created.
    """
    field = "--db" if explicit else "PRESCRIBE_DB" if os.environ.get("PRESCRIBE_DB") else None
    value = explicit or os.environ.get("PRESCRIBE_DB") or str(default_db_path())
    if "://" in value:
        if field and value.startswith("sqlite:///"):
            database = value[len("sqlite:///"):].split("?", 1)[0]
            if database and database != ":memory:" and not database.startswith("file:"):
                _folder_exists(Path(database), field, value)
        return value
    path = Path(value).expanduser().resolve()
    if field:
        _folder_exists(path, field, value)
    return "sqlite:///" + str(path)


def _folder_exists(path: Path, field: str, value: str) -> None:
    folder = path.expanduser().parent
    if not folder.is_dir():
        raise InputError.single(field, value, f"a store file in a folder that exists: for {path} the folder "
                                f"{folder} must exist (create it first, or name another file)")


@dataclass(frozen=True)
class Clinic:
    name: str = "Clinic name not set"
    contact: str = ""


def settings_path() -> Path:
    """The clinic settings file: ``PRESCRIBE_SETTINGS``, else the default under the user's config folder."""
    explicit = os.environ.get("PRESCRIBE_SETTINGS")
    if explicit:
        return Path(explicit).expanduser()
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "prescribe" / "settings.toml"


def clinic_is_set() -> bool:
    """True once the clinic has a name (from the environment or the settings file)."""
    return clinic().name != Clinic.name


#: Longest clinic name and contact line accepted (they are printed on every handout page).
MAX_CLINIC_NAME_LEN = 120
MAX_CLINIC_CONTACT_LEN = 200


def save_clinic(name: str, contact: str, path: str | os.PathLike | None = None) -> Path:
    """Write the clinic's name and contact to the settings file (other tables in it are kept).

    Both are required: the handout tells the person to call the clinic.  Raises
    :class:`InputError` naming the field, the value and what is allowed.
    """
    name, contact = (name or "").strip(), (contact or "").strip()
    if not 2 <= len(name) <= MAX_CLINIC_NAME_LEN:
        raise InputError.single("clinic name", name, f"the clinic's name, 2 to {MAX_CLINIC_NAME_LEN} characters")
    if not 3 <= len(contact) <= MAX_CLINIC_CONTACT_LEN or not any(ch.isdigit() for ch in contact):
        raise InputError.single("clinic contact", contact, "a phone number the person can call (with any e-mail "
                                f"or address after it), 3 to {MAX_CLINIC_CONTACT_LEN} characters")
    target = Path(path) if path is not None else settings_path()
    lines: list[str] = []
    if target.exists():
        try:
            text = target.read_text(encoding="utf-8")
            tomllib.loads(text)
        except (OSError, tomllib.TOMLDecodeError) as exc:
            raise InputError.single("PRESCRIBE_SETTINGS", str(target), f"a readable TOML settings file ({exc})") from None
        # Keep every other table as written; drop the old [clinic] table.
        skip = False
        for line in text.splitlines():
            stripped = line.strip()
            if stripped.startswith("[") and stripped.endswith("]"):
                skip = stripped == "[clinic]"
            if not skip:
                lines.append(line)
    def q(value: str) -> str:
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    body = "\n".join(lines).rstrip()
    block = f"[clinic]\nname = {q(name)}\ncontact = {q(contact)}\n"
    target.parent.mkdir(parents=True, exist_ok=True)
    target.write_text((body + "\n\n" if body else "") + block, encoding="utf-8")
    return target


@dataclass(frozen=True)
class TranslationReview:
    """Whether a qualified translator has reviewed a language's text of the person's pages.

    Recorded in the clinic settings (the ``PRESCRIBE_SETTINGS`` file)::

        [translations.es]
        reviewed_by = "A. Name, certified medical translator (NAATI 12345)"
        reviewed_on = 2027-01-15

    Without such a table the language counts as not reviewed: the translations shipped with
    prescribe were written by its developers and no qualified translator has reviewed them.
    """

    language: str
    reviewed_by: str = ""
    reviewed_on: _dt.date | None = None

    @property
    def reviewed(self) -> bool:
        return bool(self.reviewed_by) and self.reviewed_on is not None


def translation_review(language: str) -> TranslationReview:
    """The clinic's record of a translator's review of ``language`` (none by default).

    A malformed record raises :class:`InputError` naming the setting, the value and what
    is allowed: a review is never assumed from half a record.
    """
    from .languages import LANGUAGES, check_language

    check_language(language)
    table = _settings_data().get("translations", {})
    where = "PRESCRIBE_SETTINGS [translations]"
    if not isinstance(table, dict):
        raise InputError.single(where, table, "a table of languages, e.g. [translations.es]")
    for key in table:
        if key not in LANGUAGES:
            raise InputError.single(f"{where} {key}", key, "one of " + ", ".join(LANGUAGES))
    entry = table.get(language, {})
    where = f"PRESCRIBE_SETTINGS [translations.{language}]"
    if not isinstance(entry, dict):
        raise InputError.single(where, entry, "a table with reviewed_by and reviewed_on")
    unknown = sorted(set(entry) - {"reviewed_by", "reviewed_on"})
    if unknown:
        raise InputError.single(f"{where} {unknown[0]}", entry[unknown[0]], "only reviewed_by and reviewed_on")
    by, on = entry.get("reviewed_by", ""), entry.get("reviewed_on")
    if not isinstance(by, str) or (entry and not by.strip()):
        raise InputError.single(f"{where} reviewed_by", by, "the reviewing translator's name and qualification")
    if isinstance(on, str):
        try:
            on = _dt.date.fromisoformat(on)
        except ValueError:
            raise InputError.single(f"{where} reviewed_on", on, "a date (YYYY-MM-DD)") from None
    if isinstance(on, _dt.datetime):
        on = on.date()
    if entry and not isinstance(on, _dt.date):
        raise InputError.single(f"{where} reviewed_on", on, "the date of the review (YYYY-MM-DD)")
    if on is not None and on > _dt.date.today():
        raise InputError.single(f"{where} reviewed_on", on.isoformat(), "a date not after today")
    return TranslationReview(language, by.strip(), on)


def _settings_data() -> dict:
    """The clinic settings file's tables ({} without a file)."""
    path = os.environ.get("PRESCRIBE_SETTINGS") or (str(settings_path()) if settings_path().exists() else None)
    if not path:
        return {}
    try:
        return tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise InputError.single("PRESCRIBE_SETTINGS", path, f"a readable TOML settings file ({exc})") from None


def clinic() -> Clinic:
    name = os.environ.get("PRESCRIBE_CLINIC_NAME")
    contact = os.environ.get("PRESCRIBE_CLINIC_CONTACT")
    table = _settings_data().get("clinic", {})
    name = name or table.get("name")
    contact = contact or table.get("contact")
    return Clinic(name=name or Clinic.name, contact=contact or "")


# -- identity and roles ---------------------------------------------------------------

def hub_login() -> str | None:
    """The JupyterHub login of this server's user, or None outside a hub."""
    login = (os.environ.get(HUB_USER_ENV) or "").strip()
    return login or None


def current_clinician(explicit: str | None = None, *, required: bool = False) -> str:
    """Who is saving: the hub login when there is one, else the explicit free-text name.

    Under JupyterHub an explicit name that differs from the login is refused with an
    :class:`InputError` (it is never silently replaced): the login is what the record
    shows.  Without a hub the explicit name is used as given (stripped); with
    ``required`` an empty name is refused.
    """
    if explicit is not None and not isinstance(explicit, str):
        raise InputError.single("clinician", explicit, "text: the name or initials of the clinician")
    name = (explicit or "").strip()
    check_identifier(name, "clinician")  # no NUL, control or invisible direction characters
    login = hub_login()
    if login is not None:
        if name and name != login:
            raise InputError.single("clinician", name, f"your login {login!r} or nothing: under JupyterHub "
                                    "every save is recorded under the login of the clinician who made it")
        return login
    if len(name) > MAX_CLINICIAN_LEN:
        raise InputError.single("clinician", name, f"a name or initials of at most {MAX_CLINICIAN_LEN} characters")
    if required and not name:
        raise InputError.single("clinician", explicit, "the name or initials of the clinician "
                                "(--clinician NAME), recorded in the audit log")
    return name


def clinic_leads() -> frozenset[str]:
    """The clinicians the clinic settings name as leads (PRESCRIBE_CLINIC_LEADS, [roles] leads)."""
    names = {n.strip() for n in os.environ.get(LEADS_ENV, "").split(",") if n.strip()}
    path = os.environ.get("PRESCRIBE_SETTINGS")
    if path:
        try:
            data = tomllib.loads(Path(path).read_text(encoding="utf-8"))
        except (OSError, tomllib.TOMLDecodeError) as exc:
            raise InputError.single("PRESCRIBE_SETTINGS", path, f"a readable TOML settings file ({exc})") from None
        leads = data.get("roles", {}).get("leads", [])
        if not isinstance(leads, list) or not all(isinstance(n, str) for n in leads):
            raise InputError.single("PRESCRIBE_SETTINGS [roles] leads", leads, "a list of clinician names")
        names |= {n.strip() for n in leads if n.strip()}
    return frozenset(names)


def clinician_role(name: str) -> str:
    """``"lead"`` or ``"clinician"`` for this clinician.

    A lead is the hub's logged-in user whose server the hub marked ``PRESCRIBE_HUB_ROLE=lead``
    (a hub admin or a member of the ``clinic-leads`` group), or anyone the clinic
    settings list as a lead.  Outside a hub, a clinic whose settings list no lead has no
    roles: every named clinician may act as lead.  Everyone else, and an empty name, is a
    clinician.
    """
    name = (name or "").strip()
    if not name:
        return "clinician"
    login = hub_login()
    if login is not None and name == login and os.environ.get(HUB_ROLE_ENV, "").strip() == "lead":
        return "lead"
    leads = clinic_leads()
    if login is None and not leads:
        # A single-user install that names no leads: whoever types a name acts as lead (a
        # typed name proves nothing there); the store still keeps the four-eyes rule.
        return "lead"
    return "lead" if name in leads else "clinician"


def require_role(name: str, action: str) -> str:
    """Refuse ``action`` (a key of ROLE_ACTIONS) unless ``name`` has the role it needs.

    Returns the role.  Raises :class:`NotPermittedError` (exit 2) naming the clinician,
    the action and who may do it.
    """
    if action not in ROLE_ACTIONS:
        raise InputError.single("action", action, "one of " + ", ".join(sorted(ROLE_ACTIONS)))
    role = clinician_role(name)
    needed = ROLE_ACTIONS[action]
    if role != needed:
        raise NotPermittedError(name, action.replace("_", " "), needed)
    return role
