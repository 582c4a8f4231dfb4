"""`prescribe app`: the command's checks and the Voila options it serves with (serving itself is
exercised by the browser tests, which start the app through this command)."""

from __future__ import annotations

import json
import os
import socket
from pathlib import Path

from prescribe.cli import app_cmd
from tests.conftest import run_cli


def test_port_in_use_is_a_clear_message_and_exit_1():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen(1)
        port = s.getsockname()[1]
        result = run_cli("app", "--port", str(port))
    assert result.returncode == 1
    assert f"port {port} on 127.0.0.1 is already in use" in result.stderr
    assert "--port" in result.stderr and "Traceback" not in result.stderr


def test_a_port_out_of_range_is_bad_input_exit_2():
    result = run_cli("app", "--port", "70000")
    assert result.returncode == 2
    assert "--port must be a port number from 1 to 65535, not 70000." in result.stderr


def test_voila_serves_only_on_loopback_with_the_offline_template_and_culling(tmp_path):
    cmd = app_cmd.voila_command(8866, Path("clinic.ipynb"))
    assert "--Voila.ip=127.0.0.1" in cmd and "--no-browser" in cmd and "--port=8866" in cmd
    assert f"--template={app_cmd.TEMPLATE_NAME}" in cmd
    assert any(a.startswith("--MappingKernelManager.cull_idle_timeout=") for a in cmd)
    assert "--MappingKernelManager.cull_connected=False" in cmd
    # Voila exits when one option is given twice (STACK_NOTES): each appears once.
    names = [a.split("=")[0] for a in cmd if a.startswith("--")]
    assert len(names) == len(set(names))
    env = app_cmd.voila_environment(str(tmp_path / "x.db"))
    assert env["PRESCRIBE_DB"] == "sqlite:///" + str((tmp_path / "x.db").resolve())
    assert env["JUPYTER_PATH"].split(os.pathsep)[0] == str(app_cmd.template_root())


def test_the_offline_template_links_nothing_outside_the_machine():
    folder = app_cmd.template_root() / "voila" / "templates" / app_cmd.TEMPLATE_NAME
    assert json.loads((folder / "conf.json").read_text()) == {"base_template": "lab"}
    page = (folder / "index.html.j2").read_text()
    for needle in ("cdn.", "https://cdn", "fontawesome", "mathjax.js", "unpkg"):
        assert needle not in page.lower()


def test_the_checkout_notebook_is_the_one_served():
    assert app_cmd.notebook_path() == Path(app_cmd.__file__).resolve().parents[2] / "apps" / "clinic.ipynb"


def test_binder_files_install_the_lock_seed_the_demo_and_use_the_offline_template():
    root = Path(app_cmd.__file__).resolve().parents[2] / "binder"
    assert "-r ../requirements.lock" in (root / "requirements.txt").read_text()
    post = (root / "postBuild").read_text()
    assert "prescribe db init" in post and "python -m prescribe.demo" in post
    config = json.loads(post.split("<<JSON\n", 1)[1].split("\nJSON", 1)[0])
    assert config["VoilaConfiguration"]["template"] == app_cmd.TEMPLATE_NAME
    assert config["MappingKernelManager"]["cull_connected"] is False
    assert "template_root" in (root / "start").read_text()
    for name in ("postBuild", "start"):
        assert os.access(root / name, os.X_OK)
