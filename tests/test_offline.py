"""Offline guarantee: a full run with every network call blocked must succeed."""
import subprocess
import sys
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

# Replaces the socket layer before anything is imported: any attempt to resolve a host or
# open a connection raises and is recorded, and the script fails at the end if one happened.
BLOCK = textwrap.dedent("""
    import socket, sys
    attempts = []
    def refuse(*args, **kwargs):
        attempts.append(args[:2])
        raise OSError("network blocked by test")
    socket.socket.connect = refuse
    socket.socket.connect_ex = refuse
    socket.create_connection = refuse
    socket.getaddrinfo = refuse
    sys.path.insert(0, {root!r})
    from planner.cli import main
    code = main({argv!r})
    if attempts:
        print("NETWORK ATTEMPTS:", attempts, file=sys.stderr)
        sys.exit(99)
    sys.exit(code)
""")


def _run_blocked(argv, cwd):
    script = BLOCK.format(root=str(ROOT), argv=argv)
    (cwd / "cache").mkdir(exist_ok=True)
    (cwd / "config").mkdir(exist_ok=True)
    # A fresh astropy cache folder: nothing cached from earlier runs can hide a download.
    env = {"PATH": "/usr/bin:/bin", "HOME": str(cwd), "XDG_CACHE_HOME": str(cwd / "cache"),
           "XDG_CONFIG_HOME": str(cwd / "config")}
    return subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          cwd=cwd, env=env)


def test_demo_runs_with_network_blocked(tmp_path):
    proc = _run_blocked(["demo", "--output-dir", str(tmp_path / "out")], tmp_path)
    assert proc.returncode == 0, proc.stderr
    for name in ("plan-hollowmere.json", "plan-hollowmere.ics", "brief-hollowmere.html",
                 "atlas-hollowmere.png"):
        assert (tmp_path / "out" / name).exists()


def test_past_iers_table_end_runs_offline(tmp_path):
    # Two years ahead is past the bundled IERS predictions: must still work, quietly.
    proc = _run_blocked(["crossings", "--dec", "20", "--start", "2029-06-01", "--days", "2",
                         "--format", "json"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert '"passages"' in proc.stdout and "Warning" not in proc.stderr
