"""``cablekit serve [NOTEBOOK] [--port N] [--design FILE]``: open a notebook as a dashboard.

Starts Voila on 127.0.0.1 (this machine only) with the notebook's sources hidden, prints the
address, and stops Voila and its kernels cleanly on Ctrl-C, SIGTERM or SIGHUP; if cablekit
itself is killed (SIGKILL) the operating system tells Voila to stop too (parent-death signal).

Locked down by default: the browser must present a token (a new random one each start,
printed in the address; ``--token`` gives one of at least 16 characters, ``--no-token``
turns it off on this machine only), on 127.0.0.1 requests whose ``Host`` is not a loopback
address or ``localhost`` are refused (so a web page cannot reach the server by DNS
rebinding), and a page's kernel is shut down once it has been idle with no browser connected
for ``--cull-idle``.  The token is handed to Voila in a private configuration file, not on
its command line.

A notebook with a cell tagged ``parameters`` (every bundled one) is served from a copy whose
parameters cell names the design file (``--design FILE``, or none: the bundled demo, and
``?design=NAME`` picks another) and the folder where the dashboard saves and loads designs:
the folder ``cablekit serve`` was started from, never the installed package.
"""

from __future__ import annotations

import ipaddress
import json
import math
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from ..cli import InputError, option_quantity
from ..limits import MIN_TOKEN_LENGTH

NAME = "serve"
HELP = "open a cablekit notebook as a dashboard in the browser (Voila)"
DESCRIPTION = (
    "Serve a notebook from notebooks/ as a dashboard (sources hidden) on 127.0.0.1. "
    "NOTEBOOK is a path or a name such as 'explore_layout', 'accuracy_study', 'arm_and_task' "
    "or 'review'. Ctrl-C stops the server."
)

DEFAULT_NOTEBOOK = "explore_layout"
DEFAULT_PORT = 8866
START_TIMEOUT = 60.0  # [s] for Voila to open its port
DEFAULT_CULL_IDLE = "10 min"  # common practice, no source: a closed page's kernel goes after 10 minutes
_TOKEN_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_")


def add_arguments(p) -> None:
    p.add_argument("notebook", nargs="?", default=DEFAULT_NOTEBOOK, metavar="NOTEBOOK",
                   help=f"notebook path or name in notebooks/ (default: {DEFAULT_NOTEBOOK})")
    p.add_argument("--port", type=int, default=DEFAULT_PORT,
                   help=f"TCP port (default {DEFAULT_PORT}; 0 picks a free one)")
    p.add_argument("--design", metavar="DESIGN.toml", help="design file the dashboard opens (default: a demo)")
    p.add_argument("--ip", default="127.0.0.1",
                   help="address to listen on (default 127.0.0.1, this machine only); any other address "
                        "serves to the network and requires a token")
    p.add_argument("--token", help=f"access token the browser must present, at least {MIN_TOKEN_LENGTH} letters, "
                                   "digits, '-' or '_' (default: a new random one each start, printed in the address)")
    p.add_argument("--no-token", action="store_true",
                   help="serve without a token (127.0.0.1 only): any program on this machine can then use the "
                        "dashboard")
    p.add_argument("--cull-idle", default=DEFAULT_CULL_IDLE, metavar="TIME",
                   help=f"shut a page's kernel down after it has been idle with no browser connected this long "
                        f"(default {DEFAULT_CULL_IDLE})")


def _notebook_folders() -> list[Path]:
    here = Path(__file__).resolve().parents[2] / "notebooks"
    return [Path.cwd() / "notebooks", here]


def find_notebook(name: str) -> Path:
    """A notebook path, or a name looked up in ``./notebooks`` and the package's notebooks/."""
    path = Path(name)
    if path.suffix == ".ipynb" or path.parent != Path("."):
        if not path.is_file():
            raise InputError(f"notebook {name!r} not found")
        return path.resolve()
    for folder in _notebook_folders():
        candidate = folder / f"{name}.ipynb"
        if candidate.is_file():
            return candidate.resolve()
    names = sorted({p.stem for folder in _notebook_folders() if folder.is_dir() for p in folder.glob("*.ipynb")})
    raise InputError(f"no notebook named {name!r}; choose one of: {', '.join(names) or '(none found)'}")


def _is_loopback(ip: str) -> bool:
    if ip == "localhost":
        return True
    try:
        return ipaddress.ip_address(ip).is_loopback
    except ValueError:
        raise InputError(f"--ip: {ip!r} is not an IP address") from None


def _free_port(ip: str, port: int) -> int:
    """Check that ``port`` can be bound on ``ip`` (or pick one for 0) and return it."""
    family = socket.AF_INET6 if ":" in ip else socket.AF_INET
    with socket.socket(family, socket.SOCK_STREAM) as s:
        try:
            s.bind((ip, port))
        except OSError as exc:
            raise InputError(f"port {port} on {ip} is not available ({exc.strerror}); choose another with --port") from None
        return s.getsockname()[1]


def _wait_for_port(proc: subprocess.Popen, ip: str, port: int, timeout: float) -> bool:
    host = "127.0.0.1" if ip in ("0.0.0.0", "localhost") else ("::1" if ip == "::" else ip)
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if proc.poll() is not None:
            return False
        try:
            with socket.create_connection((host, port), timeout=0.5):
                return True
        except OSError:
            time.sleep(0.2)
    return False


def parameterised_copy(notebook: Path, folder: Path, values: dict) -> Path:
    """Copy ``notebook`` into ``folder`` with its cell tagged ``parameters`` set to ``values``.

    Values are written as Python literals with :func:`repr` (strings only), never evaluated.
    """
    import nbformat

    nb = nbformat.read(notebook, as_version=4)
    cells = [c for c in nb.cells if "parameters" in c.get("metadata", {}).get("tags", [])]
    if not cells:
        raise InputError(f"{notebook.name} has no cell tagged 'parameters', so --design cannot be passed to it")
    cells[0].source = "".join(f"{k} = {'None' if v is None else repr(str(v))}\n" for k, v in values.items())
    out = folder / notebook.name
    nbformat.write(nb, out)
    return out


def _has_parameters(notebook: Path) -> bool:
    import nbformat

    try:
        nb = nbformat.read(notebook, as_version=4)
    except Exception as exc:  # nbformat raises several kinds for a file that is not a notebook
        raise InputError(f"notebook {str(notebook)!r} cannot be read ({type(exc).__name__}: {exc})"[:300]) from None
    return any("parameters" in c.get("metadata", {}).get("tags", []) for c in nb.cells)


class _Stop(Exception):
    pass


def _raise_stop(signum, frame):
    raise _Stop()


def choose_token(token: str | None, no_token: bool, ip: str) -> str:
    """The token Voila will ask for ('' for none); refuses weak tokens and --no-token beyond loopback."""
    if no_token:
        if token:
            raise InputError("--no-token and --token exclude each other")
        if not _is_loopback(ip):
            raise InputError(f"--no-token: serving on {ip} reaches other machines and always needs a token")
        return ""
    if token is None:
        return secrets.token_urlsafe(24)
    if len(token) < MIN_TOKEN_LENGTH or not set(token) <= _TOKEN_CHARS:
        raise InputError(f"--token: at least {MIN_TOKEN_LENGTH} characters, only letters, digits, '-' and '_' "
                         f"(got {len(token)} characters); or leave it out and one is generated")
    return token


def voila_config(*, ip: str, port: int, token: str, cull_idle: float) -> dict:
    """Voila's configuration: address, token, Host check, kernel culling, hidden sources."""
    interval = int(max(1, min(60, cull_idle / 2)))
    config = {
        "Voila": {"ip": ip, "port": port, "port_retries": 0, "open_browser": False, "token": token},
        "VoilaConfiguration": {"strip_sources": True, "show_tracebacks": False},
        # jupyter_server's kernel manager: shut a kernel down once it is idle with no browser
        # connected (a closed or never-opened page); a connected page keeps its kernel
        "MappingKernelManager": {"cull_idle_timeout": int(math.ceil(cull_idle)), "cull_interval": interval,
                                 "cull_connected": False, "cull_busy": False},
    }
    if _is_loopback(ip):
        # Voila sets allow_remote_access, which turns jupyter_server's Host check off; on this
        # machine only loopback addresses and 'localhost' are names the server answers to
        config["Voila"]["tornado_settings"] = {"allow_remote_access": False, "local_hostnames": ["localhost"]}
    return config


def _die_with_parent(parent: int):
    """For Popen's preexec_fn: the child gets SIGTERM when cablekit dies, even by SIGKILL (Linux)."""

    def setup() -> None:
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG
        except (OSError, AttributeError):  # not Linux: the process group is stopped by _stop instead
            return
        if os.getppid() != parent:  # cablekit died before prctl took effect
            os._exit(1)

    return setup


def run(args) -> int:
    notebook = find_notebook(args.notebook)
    token = choose_token(args.token, args.no_token, args.ip)
    cull_idle = option_quantity(args.cull_idle, "time", "--cull-idle")
    port = _free_port(args.ip, args.port)
    start_folder = Path.cwd().resolve()
    workdir = Path(tempfile.mkdtemp(prefix="cablekit-serve-"))
    try:
        design = None
        if args.design:
            design = Path(args.design).resolve()
            from ..design import load_design

            load_design(design)  # a broken file: the validation list now, not a broken dashboard
        # a copy that names the design and the folder saves go to (where we were started); a
        # notebook of the user's own without a parameters cell is served as it is
        if design is not None or _has_parameters(notebook):
            notebook = parameterised_copy(notebook, workdir, {"DESIGN": design, "DESIGN_FOLDER": start_folder})
        config = voila_config(ip=args.ip, port=port, token=token, cull_idle=cull_idle)
        cfg = workdir / "voila.json"
        fd = os.open(cfg, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w") as fh:
            json.dump(config, fh)
        cmd = [sys.executable, "-m", "voila", str(notebook), f"--Voila.config_file_paths={[str(workdir)]!r}"]
        # its own session: a Ctrl-C in the terminal reaches only us, and we stop Voila in order
        proc = subprocess.Popen(cmd, cwd=str(notebook.parent), start_new_session=True,
                                preexec_fn=_die_with_parent(os.getpid()))
        # Ctrl-C (SIGINT), SIGTERM and SIGHUP (terminal closed) stop Voila in order; SIGINT is
        # caught explicitly since a shell starting us in the background would otherwise have it ignored
        previous = {s: signal.signal(s, _raise_stop) for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)}
        try:
            if not _wait_for_port(proc, args.ip, port, START_TIMEOUT):
                code = proc.poll()
                print(f"cablekit serve: Voila did not start ({'exit code %s' % code if code is not None else 'timed out'}); "
                      "see its messages above", file=sys.stderr)
                return 3
            shown = "127.0.0.1" if args.ip in ("0.0.0.0", "localhost") else args.ip
            url = f"http://{shown}:{port}/" + (f"?token={token}" if token else "")
            print(f"cablekit dashboard: {url}", flush=True)
            print(f"  notebook {notebook.name}, sources hidden; "
                  + ("reachable from this machine only" if _is_loopback(args.ip)
                     else f"listening on {args.ip}: anyone on the network with the token can use it")
                  + "; press Ctrl-C to stop", flush=True)
            print(f"  designs are saved to and loaded from {start_folder}", flush=True)
            proc.wait()
            print(f"cablekit serve: Voila exited with code {proc.returncode}", file=sys.stderr)
            return 3 if proc.returncode else 0
        except (KeyboardInterrupt, _Stop):
            print("cablekit serve: stopping", flush=True)
            return 0
        finally:
            for s in previous:  # a second Ctrl-C must not cut the shutdown short
                signal.signal(s, signal.SIG_IGN)
            try:
                _stop(proc)
            finally:
                for s, handler in previous.items():
                    signal.signal(s, handler)
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


def _stop(proc: subprocess.Popen) -> None:
    """SIGTERM Voila (it shuts its kernels down), then SIGKILL its process group if it hangs."""
    if proc.poll() is not None:
        return
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.wait(timeout=5)
