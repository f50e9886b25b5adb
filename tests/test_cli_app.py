"""``auditmean app`` without serving: its options, the Voila command, when a browser is opened.

(The app served for real is tested in tests/test_app_browser.py.)
"""

from __future__ import annotations

import importlib.util
import socket
from pathlib import Path

import nbformat
import pytest

from auditmean.cli import SUBCOMMANDS, build_parser, main
from auditmean.cli import app as app_cli

PROJECT = Path(__file__).resolve().parents[1]


def test_app_is_a_subcommand_after_status():
    assert SUBCOMMANDS.index("app") == SUBCOMMANDS.index("status") + 1
    args = build_parser().parse_args(["app", "--demo", "--port", "8123", "--no-browser"])
    assert (args.demo, args.port, args.no_browser, args.engagement) == (True, 8123, True, None)


def test_voila_serves_the_packaged_notebook_on_localhost_only():
    cmd = app_cli.voila_command(8123)
    assert cmd[1:3] == ["-m", "voila"]
    assert cmd[3] == str(app_cli.app_notebook())
    assert "--Voila.ip=127.0.0.1" in cmd and "--port=8123" in cmd and "--no-browser" in cmd
    assert "--Voila.port_retries=0" in cmd  # fail rather than move to another port


def test_the_app_notebook_is_shipped_and_runs_the_app():
    path = app_cli.app_notebook()
    nb = nbformat.read(path, as_version=4)
    assert any("App.from_environment()" in c.source for c in nb.cells if c.cell_type == "code")
    assert all(not c.get("outputs") for c in nb.cells if c.cell_type == "code")
    tomllib = pytest.importorskip("tomllib")  # Python 3.11 and later
    data = tomllib.loads((PROJECT / "pyproject.toml").read_text())
    shipped = data["tool"]["setuptools"]["package-data"]["auditmean"]
    assert "widgets/app.ipynb" in shipped


def test_a_browser_is_opened_only_outside_ci_and_with_a_display():
    should = app_cli.should_open_browser
    assert not should({"CI": "true", "DISPLAY": ":0"}, "linux")
    assert not should({}, "linux")  # no display
    assert should({"DISPLAY": ":0"}, "linux")
    assert should({"WAYLAND_DISPLAY": "wayland-0"}, "linux")
    assert should({}, "darwin") and should({}, "win32")
    assert not should({"CI": "1"}, "darwin")


def test_without_voila_the_command_says_how_to_install_it(monkeypatch, capsys):
    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "voila" else real(name, *a))
    assert main(["app", "--no-browser"]) == 1
    err = capsys.readouterr().err
    assert 'pip install "auditmean[app]"' in err


def test_free_port_can_be_bound():
    port = app_cli.free_port()
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", port))  # still free a moment later
