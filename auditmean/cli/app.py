"""``auditmean app``: the widgets as a web page in your browser, served on this computer only.

Starts Voila on the app notebook shipped inside the package
(``auditmean/widgets/app.ipynb``), listening on 127.0.0.1 only, prints the
address, and opens it in the browser when there is one (not under CI, nor
without a display). Ctrl-C stops it. Voila comes with the ``app`` extra::

    pip install "auditmean[app]"
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import socket
import subprocess
import sys
import time
import webbrowser
from collections.abc import Mapping
from pathlib import Path

__all__ = ["APP_ENVIRONMENT", "register", "run", "app_notebook", "voila_command", "should_open_browser", "free_port"]

#: Environment variables that pass the command's options to the app notebook
#: (read by :meth:`auditmean.widgets.App.from_environment`).
APP_ENVIRONMENT = {
    "demo": "AUDITMEAN_APP_DEMO",
    "data": "AUDITMEAN_APP_DATA",
    "engagement": "AUDITMEAN_APP_ENGAGEMENT",
    "cwd": "AUDITMEAN_APP_CWD",
}

_INSTALL_HINT = 'The browser app needs Voila. Install it with:  pip install "auditmean[app]"'
_START_TIMEOUT = 120.0


def app_notebook() -> Path:
    """The app notebook inside the installed package."""
    return Path(__file__).resolve().parents[1] / "widgets" / "app.ipynb"


def free_port() -> int:
    """A TCP port on 127.0.0.1 that is free now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def voila_command(port: int, notebook: Path | None = None) -> list[str]:
    """The command that serves the app: Voila on 127.0.0.1 only, no browser of its own, no tracebacks."""
    return [
        sys.executable, "-m", "voila", str(notebook or app_notebook()),
        "--no-browser",
        f"--port={int(port)}",
        "--Voila.ip=127.0.0.1",
        "--Voila.port_retries=0",
        "--show_tracebacks=False",
        "--theme=light",
    ]


def should_open_browser(environ: Mapping[str, str], platform: str) -> bool:
    """Open a browser only outside CI and where one can be shown (a display on Linux and the BSDs)."""
    if environ.get("CI", "").lower() in ("1", "true", "yes"):
        return False
    if platform.startswith(("linux", "freebsd", "openbsd", "netbsd")):
        return bool(environ.get("DISPLAY") or environ.get("WAYLAND_DISPLAY"))
    return True


def _wait_for_port(port: int, process: subprocess.Popen, timeout: float) -> bool:
    # A plain TCP connect: a GET of the page would start a kernel and run the notebook.
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if process.poll() is not None:
            return False
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                return True
        except OSError:
            time.sleep(0.2)
    return False


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "app",
        help="open the widgets as a web page in your browser (served on this computer only)",
        description=(
            "Serve auditmean's widgets, every step of the job on one page, with Voila on 127.0.0.1 "
            "(this computer only), print the address and open it in the browser. Ctrl-C stops it."
        ),
    )
    p.add_argument("--engagement", default=None, metavar="DIR", help="resume this engagement folder at once")
    p.add_argument("--demo", action="store_true",
                   help="prefill the invented demo ledger and settings (from the project folder, or after auditmean demo)")
    p.add_argument("--data", default=None, metavar="DIR",
                   help="folder with the demo files (default: ./demo_data, else ./auditmean-demo/demo_data)")
    p.add_argument("--port", type=int, default=0, help="port on 127.0.0.1 (default: a free one)")
    p.add_argument("--no-browser", action="store_true", help="only print the address; do not open a browser")
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    if importlib.util.find_spec("voila") is None:
        print(f"auditmean app: {_INSTALL_HINT}", file=sys.stderr)
        return 1
    notebook = app_notebook()
    if not notebook.exists():
        print(f"auditmean app: the app notebook {notebook} is missing from the installation; reinstall auditmean",
              file=sys.stderr)
        return 1
    port = int(args.port) or free_port()
    env = dict(os.environ)
    env[APP_ENVIRONMENT["cwd"]] = os.getcwd()
    env[APP_ENVIRONMENT["demo"]] = "1" if args.demo else ""
    env[APP_ENVIRONMENT["data"]] = str(Path(args.data).resolve()) if args.data else ""
    env[APP_ENVIRONMENT["engagement"]] = str(Path(args.engagement).resolve()) if args.engagement else ""
    env.setdefault("PLOTLY_RENDERER", "plotly_mimetype")
    process = subprocess.Popen(voila_command(port, notebook), env=env, cwd=str(notebook.parent))
    try:
        if not _wait_for_port(port, process, _START_TIMEOUT):
            code = process.poll()
            print(f"auditmean app: Voila did not start on port {port}"
                  + (f" (it ended with code {code})" if code is not None else "") + "; is the port in use?",
                  file=sys.stderr)
            return 1
        url = f"http://127.0.0.1:{port}/"
        print(f"auditmean app: open {url} in your browser (this computer only). Ctrl-C stops the app.", flush=True)
        if not args.no_browser and should_open_browser(os.environ, sys.platform):
            webbrowser.open(url)
        return int(process.wait())
    except KeyboardInterrupt:
        print("auditmean app: stopping", file=sys.stderr)
        return 0
    finally:
        if process.poll() is None:
            process.terminate()
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
