"""The deployment files: the hub configuration loads and sets what the clinic relies on,
and the Kubernetes values file parses with the keys we rely on (it is not run here)."""

from __future__ import annotations

import json
import types
from pathlib import Path

import pytest
import yaml
from traitlets.config import Config

ROOT = Path(__file__).resolve().parents[1]
DEPLOY = ROOT / "deploy"


def load_hub_config(monkeypatch, tmp_path, **env) -> Config:
    for key in ("PRESCRIBE_HUB_SPAWNER", "PRESCRIBE_HUB_ADMINS", "PRESCRIBE_HUB_LEADS", "PRESCRIBE_DB"):
        monkeypatch.delenv(key, raising=False)
    monkeypatch.setenv("PRESCRIBE_HUB_DIR", str(tmp_path))
    for key, value in env.items():
        monkeypatch.setenv(key, value)
    c = Config()
    code = compile((DEPLOY / "jupyterhub_config.py").read_text(), "jupyterhub_config.py", "exec")
    exec(code, {"get_config": lambda: c, "__file__": str(DEPLOY / "jupyterhub_config.py")})
    return c


def test_the_hub_serves_the_app_to_approved_logins_and_culls_idle_servers(monkeypatch, tmp_path):
    c = load_hub_config(monkeypatch, tmp_path, PRESCRIBE_HUB_ADMINS="clinic-admin",
                        PRESCRIBE_HUB_LEADS="lena.vos", PRESCRIBE_DB="postgresql+psycopg://app@db.internal/prescribe")
    assert c.JupyterHub.ip == "127.0.0.1" and c.JupyterHub.hub_ip == "127.0.0.1"
    assert c.JupyterHub.authenticator_class == "native" and c.NativeAuthenticator.open_signup is False
    assert c.NativeAuthenticator.minimum_password_length >= 12
    assert c.Authenticator.admin_users == {"clinic-admin"}
    assert c.JupyterHub.load_groups == {"clinic-leads": {"users": ["lena.vos"]}}
    # the app is each clinician's default page, through Voila's server extension
    assert c.Spawner.default_url == "/voila/render/clinic.ipynb"
    assert (Path(c.Spawner.notebook_dir) / "clinic.ipynb").is_file()
    assert "--VoilaConfiguration.template=prescribe-offline" in c.Spawner.args
    assert (Path(c.Spawner.environment["JUPYTER_PATH"]) / "voila" / "templates" / "prescribe-offline").is_dir()
    assert c.Spawner.environment["PRESCRIBE_DB"].startswith("postgresql+psycopg://")
    # the production spawner enforces the per-clinician limits
    assert c.JupyterHub.spawner_class == "systemdspawner.SystemdSpawner" and c.SystemdSpawner.dynamic_users
    assert c.Spawner.mem_limit == "1G" and c.Spawner.cpu_limit == 1.0
    # idle culling: a hub service with exactly the scopes it needs
    [culler] = c.JupyterHub.services
    assert culler["command"][1:3] == ["-m", "jupyterhub_idle_culler"] and "--timeout=3600" in culler["command"]
    [role] = c.JupyterHub.load_roles
    assert role["services"] == ["idle-culler"] and "delete:servers" in role["scopes"]
    import jupyterhub_idle_culler  # noqa: F401  (pinned in the hub extra)


def test_the_hub_tells_each_server_its_clinicians_role(monkeypatch, tmp_path):
    c = load_hub_config(monkeypatch, tmp_path)
    role = c.Spawner.environment["PRESCRIBE_HUB_ROLE"]

    def spawner(admin=False, groups=()):
        user = types.SimpleNamespace(admin=admin, groups=[types.SimpleNamespace(name=g) for g in groups])
        return types.SimpleNamespace(user=user)

    assert role(spawner()) == "clinician"
    assert role(spawner(groups=["physios"])) == "clinician"
    assert role(spawner(groups=["clinic-leads"])) == "lead"
    assert role(spawner(admin=True)) == "lead"


def test_an_unknown_spawner_choice_is_refused(monkeypatch, tmp_path):
    with pytest.raises(ValueError, match="PRESCRIBE_HUB_SPAWNER"):
        load_hub_config(monkeypatch, tmp_path, PRESCRIBE_HUB_SPAWNER="docker")
    c = load_hub_config(monkeypatch, tmp_path, PRESCRIBE_HUB_SPAWNER="simple")
    assert c.JupyterHub.spawner_class == "simple"


def test_the_single_user_servers_load_nothing_from_a_cdn():
    conf = json.loads((DEPLOY / "singleuser" / "jupyter_server_config.json").read_text())
    assert conf["ServerApp"]["tornado_settings"] == {"mathjax_url": None, "mathjax_config": None}


def test_the_proxy_is_pinned_for_npm():
    package = json.loads((DEPLOY / "proxy" / "package.json").read_text())
    assert package["dependencies"] == {"configurable-http-proxy": "5.3.0"}
    lock = json.loads((DEPLOY / "proxy" / "package-lock.json").read_text())
    assert lock["packages"]["node_modules/configurable-http-proxy"]["version"] == "5.3.0"


def test_the_kubernetes_values_parse_and_set_what_we_rely_on():
    values = yaml.safe_load((DEPLOY / "k8s" / "values.yaml").read_text())
    assert set(values) <= {"hub", "singleuser", "cull", "proxy", "scheduling", "prePuller", "ingress"}
    single = values["singleuser"]
    assert single["defaultUrl"] == "/voila/render/clinic.ipynb"
    assert single["cmd"] == "jupyterhub-singleuser"
    assert single["storage"]["type"] == "none"
    assert single["memory"]["limit"] == "1G" and single["cpu"]["limit"] == 1
    assert single["extraEnv"]["PRESCRIBE_DB"]["valueFrom"]["secretKeyRef"] == {"name": "prescribe-store", "key": "url"}
    assert single["networkPolicy"]["egressAllowRules"]["nonPrivateIPs"] is False
    hub = values["hub"]
    assert hub["db"]["type"] == "postgres" and hub["db"]["url"].startswith("postgresql://")
    assert "@" in hub["db"]["url"] and ":" not in hub["db"]["url"].split("://", 1)[1].split("@", 1)[0]  # no password
    assert hub["config"]["JupyterHub"]["authenticator_class"] == "native"
    assert hub["config"]["NativeAuthenticator"]["open_signup"] is False
    assert "clinic-leads" in hub["loadGroups"]
    role_code = hub["extraConfig"]["10-prescribe-role"]
    compile(role_code, "extraConfig", "exec")  # valid Python
    assert "PRESCRIBE_HUB_ROLE" in role_code
    assert values["cull"] == {"enabled": True, "timeout": 3600, "every": 300, "users": False}
    assert values["proxy"]["https"]["enabled"] is True
    # no secret is written in the values file: passwords come from Kubernetes Secrets
    def walk(node, path=""):
        if isinstance(node, dict):
            for key, value in node.items():
                yield from walk(value, f"{path}.{key}")
        elif isinstance(node, list):
            for i, value in enumerate(node):
                yield from walk(value, f"{path}[{i}]")
        else:
            yield path, node
    for path, value in walk(values):
        name = path.rsplit(".", 1)[-1].lower()
        assert not (name in ("password", "pgpassword", "secret", "token") and isinstance(value, str)), path
        if isinstance(value, str) and "://" in value and "@" in value:
            assert ":" not in value.split("://", 1)[1].split("@", 1)[0], f"{path} holds a password"
