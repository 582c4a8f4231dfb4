# JupyterHub configuration of prescribe's multi-user app (one server; see deploy/README.md).
#
# Each clinician logs in through the hub, and the hub starts that clinician's own server
# with the clinic app (Voila's server extension) as its default page.  The app reads the
# login from JUPYTERHUB_USER: it is what the audit log, program versions, sessions and
# template approvals record, and the clinician field shows it, not editable.
#
# Settings come from the environment (all optional except where said):
#   PRESCRIBE_DB            the shared store, e.g. postgresql+psycopg://clinic@db.internal/prescribe
#                           (every clinician's server uses it; SQLite only for a trial)
#   PRESCRIBE_HUB_IP        address the hub listens on (default 127.0.0.1: put a TLS-terminating
#                           reverse proxy in front; never serve patient data over plain HTTP)
#   PRESCRIBE_HUB_PORT      port (default 8000); the proxy's API uses the next port unless
#                           PRESCRIBE_HUB_PROXY_API_PORT is given, the hub's own API
#                           PRESCRIBE_HUB_API_PORT (default 8081); all on 127.0.0.1
#   PRESCRIBE_HUB_DIR       the hub's own state: its database, cookie secret (default: cwd)
#   PRESCRIBE_HUB_ADMINS    comma-separated logins that administer the hub (approve sign-ups)
#   PRESCRIBE_HUB_LEADS     comma-separated logins put in the clinic-leads group at start-up
#   PRESCRIBE_HUB_SPAWNER   "systemd" (default: each server a transient system user, memory and
#                           CPU limits enforced) or "simple" (a trial on one machine: every server
#                           runs as the hub's own user, with no isolation between clinicians)
#   PRESCRIBE_HUB_IDLE_S    stop a clinician's server after this many idle seconds (default 3600)
#   PRESCRIBE_HUB_MEM       memory limit per clinician (default 1G)
#   PRESCRIBE_HUB_CPU       CPU limit per clinician, in cores (default 1)
#   PRESCRIBE_CHECKOUT      the prescribe checkout whose apps/ folder is served (default: ..)
#   PRESCRIBE_SETTINGS, PRESCRIBE_CLINIC_NAME, PRESCRIBE_CLINIC_CONTACT are passed on as they are.

import os
import sys
from pathlib import Path

c = get_config()  # noqa: F821  (provided by JupyterHub when it loads this file)

HERE = Path(__file__).resolve().parent
CHECKOUT = Path(os.environ.get("PRESCRIBE_CHECKOUT") or HERE.parent).resolve()
APP_DIR = CHECKOUT / "apps"
APP_NOTEBOOK = "clinic.ipynb"
TEMPLATE_ROOT = CHECKOUT / "prescribe" / "ui" / "voila_template"
HUB_DIR = Path(os.environ.get("PRESCRIBE_HUB_DIR") or os.getcwd()).resolve()
LEADS_GROUP = "clinic-leads"


def _names(var):
    return {n.strip() for n in os.environ.get(var, "").split(",") if n.strip()}


# -- the hub and its proxy -------------------------------------------------------------
c.JupyterHub.ip = os.environ.get("PRESCRIBE_HUB_IP", "127.0.0.1")
c.JupyterHub.port = int(os.environ.get("PRESCRIBE_HUB_PORT", "8000"))
c.JupyterHub.hub_ip = "127.0.0.1"
c.JupyterHub.hub_port = int(os.environ.get("PRESCRIBE_HUB_API_PORT", "8081"))
c.ConfigurableHTTPProxy.api_url = "http://127.0.0.1:%d" % int(os.environ.get("PRESCRIBE_HUB_PROXY_API_PORT",
                                                                             c.JupyterHub.port + 1))
c.JupyterHub.db_url = "sqlite:///" + str(HUB_DIR / "jupyterhub.sqlite")
c.JupyterHub.cookie_secret_file = str(HUB_DIR / "jupyterhub_cookie_secret")
c.ConfigurableHTTPProxy.pid_file = str(HUB_DIR / "jupyterhub-proxy.pid")
c.JupyterHub.cleanup_servers = True
c.JupyterHub.shutdown_on_logout = True  # logging out stops the clinician's server
c.JupyterHub.template_vars = {"announcement_login": (
    "prescribe: decision support for licensed clinicians. Sign in with your own account; every save is "
    "recorded under your login. Follow local guidelines and your clinical judgment.")}

# -- logins: NativeAuthenticator, every new account approved by an admin -----------------
# A clinic with single sign-on uses its provider instead (documented in deploy/README.md):
#   c.JupyterHub.authenticator_class = "generic-oauth"   (oauthenticator; Entra ID, Okta, Keycloak...)
#   c.JupyterHub.authenticator_class = "ldapauthenticator.LDAPAuthenticator"
c.JupyterHub.authenticator_class = "native"


def _give_handlers_a_quiet_statsd():
    """NativeAuthenticator 1.3.0 (the newest release) times each login with the handler's
    ``statsd`` attribute, which JupyterHub 6 no longer has: without this every login
    answers 500.  A do-nothing timer in its place (tests/test_hub_native.py logs in)."""
    from jupyterhub.handlers.base import BaseHandler
    if hasattr(BaseHandler, "statsd"):
        return

    class _Timer:
        def start(self):
            return self

        def stop(self, send=True):
            return None

    class _QuietStats:
        def timer(self, *args, **kwargs):
            return _Timer()

        def incr(self, *args, **kwargs):
            return None

        def timing(self, *args, **kwargs):
            return None

    BaseHandler.statsd = _QuietStats()


_give_handlers_a_quiet_statsd()
c.NativeAuthenticator.open_signup = False            # a sign-up waits for an admin's approval
c.NativeAuthenticator.minimum_password_length = 12
c.NativeAuthenticator.check_common_password = True
c.NativeAuthenticator.allowed_failed_logins = 5       # then the account is locked for a while
c.NativeAuthenticator.seconds_before_next_try = 600
c.NativeAuthenticator.enable_signup = True
c.Authenticator.admin_users = _names("PRESCRIBE_HUB_ADMINS")
# NativeAuthenticator itself refuses every account an admin has not approved, so the hub's
# own allow list stays open to approved accounts (admins are approved when they sign up).
c.Authenticator.allow_all = True
c.JupyterHub.load_groups = {LEADS_GROUP: {"users": sorted(_names("PRESCRIBE_HUB_LEADS"))}}

# -- each clinician's server: the app as the default page --------------------------------
spawner = os.environ.get("PRESCRIBE_HUB_SPAWNER", "systemd")
if spawner == "simple":
    c.JupyterHub.spawner_class = "simple"
    c.SimpleLocalProcessSpawner.home_dir_template = str(HUB_DIR / "home" / "{username}")
elif spawner == "systemd":
    c.JupyterHub.spawner_class = "systemdspawner.SystemdSpawner"
    c.SystemdSpawner.dynamic_users = True             # a transient system user per clinician
    c.SystemdSpawner.isolate_tmp = True
    c.SystemdSpawner.isolate_devices = True
    c.SystemdSpawner.disable_user_sudo = True
    c.SystemdSpawner.unit_name_template = "prescribe-{USERNAME}"
else:
    raise ValueError(f"PRESCRIBE_HUB_SPAWNER must be 'systemd' or 'simple', not {spawner!r}")

c.Spawner.notebook_dir = str(APP_DIR)
c.Spawner.default_url = f"/voila/render/{APP_NOTEBOOK}"
c.Spawner.cmd = [str(Path(sys.executable).with_name("jupyterhub-singleuser"))]
c.Spawner.args = [
    "--VoilaConfiguration.template=prescribe-offline",
    "--VoilaConfiguration.theme=light",
    "--ServerApp.terminals_enabled=False",
    # kernels of closed pages are reclaimed; a page still open is never culled
    "--MappingKernelManager.cull_idle_timeout=900",
    "--MappingKernelManager.cull_interval=60",
    "--MappingKernelManager.cull_connected=False",
]
# Per-clinician limits: enforced by SystemdSpawner (and by KubeSpawner on Kubernetes);
# the "simple" trial spawner ignores them.  One app page is about 100-150 MB.
if spawner == "simple" and os.geteuid() == 0:
    # A trial hub started as root runs the clinicians' servers as root too (no isolation):
    # acceptable only for a trial on a throw-away machine; use the systemd spawner otherwise.
    c.Spawner.args.append("--ServerApp.allow_root=True")
c.Spawner.mem_limit = os.environ.get("PRESCRIBE_HUB_MEM", "1G")
c.Spawner.cpu_limit = float(os.environ.get("PRESCRIBE_HUB_CPU", "1"))
c.Spawner.start_timeout = 120
c.Spawner.http_timeout = 90
c.JupyterHub.active_server_limit = int(os.environ.get("PRESCRIBE_HUB_MAX_SERVERS", "40"))


def _role(spawner):
    """The clinician's role for the app: lead for hub admins and the clinic-leads group."""
    user = spawner.user
    if user.admin or any(g.name == LEADS_GROUP for g in user.groups):
        return "lead"
    return "clinician"


passed_on = {k: os.environ[k] for k in ("PRESCRIBE_DB", "PRESCRIBE_SETTINGS", "PRESCRIBE_CLINIC_NAME",
                                        "PRESCRIBE_CLINIC_CONTACT", "PRESCRIBE_CLINIC_LEADS") if k in os.environ}
c.Spawner.environment = {
    **passed_on,
    "JUPYTER_PATH": str(TEMPLATE_ROOT),  # our offline Voila template: no request leaves the clinic
    # deploy/singleuser/jupyter_server_config.json: under the server extension Voila would
    # otherwise point the page at a MathJax copy on a public CDN
    "JUPYTER_CONFIG_PATH": str(HERE / "singleuser"),
    "PRESCRIBE_HUB_ROLE": _role,
}

# -- idle culling: servers nobody has used for a while are stopped ---------------------
IDLE_S = int(os.environ.get("PRESCRIBE_HUB_IDLE_S", "3600"))
c.JupyterHub.load_roles = [{
    "name": "idle-culler",
    "scopes": ["list:users", "read:users:activity", "read:servers", "delete:servers"],
    "services": ["idle-culler"],
}]
c.JupyterHub.services = [{
    "name": "idle-culler",
    "command": [sys.executable, "-m", "jupyterhub_idle_culler", f"--timeout={IDLE_S}", "--cull-every=300"],
}]
