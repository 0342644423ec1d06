"""Run ``spherokin`` command lines each in its own process, with a time and memory limit.

Used by the hostile-input tests. Starting Python and importing the analysis stack costs
about three seconds, too much per case; so one child process imports everything once
and then forks one grandchild per case. Each grandchild is a separate process with its
own exit status, stdout and stderr, an address-space limit (``RLIMIT_AS``) and an alarm
that kills it after the time limit. Results go back as one JSON line per case.

Run as ``python tests/analysis/cli_cases.py CASES.json``; CASES.json holds a list of
``{"name", "argv", "env", "cwd"}`` plus top-level ``timeout_s`` and ``memory_bytes``.
"""

from __future__ import annotations

import json
import os
import resource
import signal
import sys
import tempfile
import time
import traceback


def _preload() -> None:
    """Import what every subcommand needs (before forking, so each case starts fast)."""
    from analysis.cli.quiet import quiet_environment

    quiet_environment()  # as the command does before OpenCV is first imported
    from analysis.cli import main

    for name in main.SUBCOMMANDS:
        if name != "gui":
            main.build_parser(name)
    import analysis.kinetics.calorimetry  # noqa: F401
    import analysis.reporting.report  # noqa: F401
    import analysis.spherulites.pipeline  # noqa: F401


def _child(case: dict, out, err, timeout_s: int, memory_bytes: int) -> None:
    try:
        os.dup2(out.fileno(), 1)
        os.dup2(err.fileno(), 2)
        os.chdir(case.get("cwd") or os.getcwd())
        os.environ.update(case.get("env") or {})
        resource.setrlimit(resource.RLIMIT_AS, (memory_bytes, memory_bytes))
        signal.alarm(timeout_s)
        from analysis.cli.main import main

        code = main(list(case["argv"]))
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    except BaseException:  # noqa: BLE001 - the parent must always get a status
        traceback.print_exc()
        sys.stderr.flush()
        os._exit(99)


def run_case(case: dict, timeout_s: int, memory_bytes: int) -> dict:
    out, err = tempfile.TemporaryFile(), tempfile.TemporaryFile()
    sys.stdout.flush()
    sys.stderr.flush()
    start = time.monotonic()
    pid = os.fork()
    if pid == 0:
        _child(case, out, err, timeout_s, memory_bytes)
    _, status, usage = os.wait4(pid, 0)
    seconds = time.monotonic() - start
    out.seek(0)
    err.seek(0)
    code = os.waitstatus_to_exitcode(status)
    return {"name": case["name"], "code": code, "seconds": seconds,
            "max_rss_kb": usage.ru_maxrss,
            "stdout": out.read(20_000).decode("utf-8", "replace"),
            "stderr": err.read(20_000).decode("utf-8", "replace")}


def main() -> None:
    with open(sys.argv[1], encoding="utf-8") as stream:
        spec = json.load(stream)
    _preload()
    for case in spec["cases"]:
        result = run_case(case, int(spec["timeout_s"]), int(spec["memory_bytes"]))
        print(json.dumps(result), flush=True)


if __name__ == "__main__":
    main()
