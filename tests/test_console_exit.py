"""The console command's quick exit (:func:`pqcheck.cli.run`): the same exit codes and the
same complete output as Python's own exit, and the exit handlers still run."""

from __future__ import annotations

import json
import os
import subprocess
import sys

from attack._kit import VERDICTS, write_capture

# the documented exit codes (README, `pqcheck --help`): 0 pass, 2 usage or input error,
# 4 not applicable


def _run(args, cwd, code_before=""):
    prog = (f"import sys\n{code_before}\nsys.argv = ['pqcheck', *sys.argv[1:]]\n"
            "from pqcheck.cli import run\nrun()\n")
    return subprocess.run([sys.executable, "-c", prog, *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=120)


def test_json_on_stdout_is_complete_and_the_code_is_kept(tmp_path):
    cap = write_capture(tmp_path / "cap.csv", dur_s=1.0)
    r = _run(["analyze", cap, "--nominal-frequency", "50", "--format", "json", "--quiet",
              "--no-cache"], tmp_path)
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)  # every byte written before the process ended
    assert doc["capture"]["sha256"]


def test_input_error_keeps_its_exit_code_and_message(tmp_path):
    r = _run(["analyze", tmp_path / "missing.csv", "--quiet"], tmp_path)
    assert r.returncode == 2
    assert "missing.csv" in r.stderr


def test_exit_handlers_run_before_the_process_ends(tmp_path):
    # an atexit handler registered by any library (temporary files, worker pools) runs
    mark = tmp_path / "handler-ran"
    before = f"import atexit, pathlib\natexit.register(pathlib.Path({str(mark)!r}).touch)"
    r = _run(["--version"], tmp_path, before)
    assert r.returncode == 0 and "pqcheck" in r.stdout
    assert mark.exists()


def test_batch_workers_start_under_a_long_temporary_folder(tmp_path):
    # a Unix-domain socket path is limited to 104-108 bytes (POSIX sockaddr_un; Linux
    # unix(7)); the forkserver's socket lives in the temporary folder, so a long TMPDIR (a CI
    # runner's) must not stop the workers: they are then spawned instead
    long_tmp = tmp_path / ("t" * 40) / ("u" * 40)
    long_tmp.mkdir(parents=True)
    fleet = tmp_path / "fleet"
    write_capture(fleet / "unit-1.csv")
    write_capture(fleet / "unit-2.csv", h5=0.05)
    out = tmp_path / "rows.csv"
    env = dict(os.environ, TMPDIR=str(long_tmp))
    r = subprocess.run([sys.executable, "-m", "pqcheck.cli", "batch", str(fleet), "--limits",
                        "ieee519-2022", "--voltage-level", "400", "--isc", "5000", "--il",
                        "100", "--no-cache", "-q", "-j", "2", "-o", str(out)], cwd=tmp_path,
                       env=env, capture_output=True, text=True, timeout=300)
    assert r.returncode in VERDICTS, r.stderr
    text = out.read_text()
    assert "unit-1.csv" in text and "unit-2.csv" in text
