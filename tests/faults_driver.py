"""Run the pvsource command line in forked children that die at chosen points of writing.

Used by tests/test_outfolder.py: one Python process imports pvsource once, then
for each run (argv and a point: signal, hook, n) forks a child that runs the command and sends itself
the signal when the n-th temporary file is created (``mkstemp``: a file is
being written) or the n-th rename is about to happen (``replace``: a file is
whole under its temporary name). ``pause`` instead writes a marker file and
waits there to be killed from outside. Prints one JSON line per child: how it
ended. ``kill_workers`` kills an explore whose pool workers are busy, and
``kill_tree`` one whose dask LocalCluster has started; each reports whether
any worker outlived it.
"""

import json
import os
import signal
import sys
import time


def arm(sig, hook, n, marker):
    """Make this process send itself ``sig`` at the ``n``-th ``hook`` (see the module's docstring)."""
    count = [0]
    import pvsource.files as files

    real = {"mkstemp": files.create_temporary, "replace": os.replace}

    def trip():
        count[0] += 1
        if count[0] == n:
            if sig == "pause":
                with open(marker, "w") as f:
                    f.write(str(os.getpid()))
                time.sleep(900)  # killed from outside long before; a loaded machine may take minutes to get there
            os.kill(os.getpid(), getattr(signal, sig))
            time.sleep(5)  # a handled signal (SIGINT) is raised at the next bytecode

    def mkstemp(*args, **kwargs):
        result = real["mkstemp"](*args, **kwargs)
        trip()
        return result

    def replace(*args, **kwargs):
        trip()
        return real["replace"](*args, **kwargs)

    if hook == "mkstemp":
        files.create_temporary = mkstemp
    else:
        os.replace = replace


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as f:
            return f.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


MARKERS = None


def busy(*args, **kwargs):
    """Stands in for a combination's evaluation in a pool worker: says where it runs, then waits."""
    open(os.path.join(MARKERS, str(os.getpid())), "w").close()
    time.sleep(600)


def _fork_cli(argv, prepare=None) -> int:
    """A forked child running the command line (after ``prepare``); its pid."""
    pid = os.fork()
    if pid == 0:
        from pvsource.cli import main

        if prepare:
            prepare()
        try:
            main(argv)
        except SystemExit as exc:
            os._exit(exc.code if isinstance(exc.code, int) else 1)
        os._exit(0)
    return pid


def _survivors(pids, wait_s=30.0) -> int:
    """How many of ``pids`` are still alive after ``wait_s``; those are then killed."""
    deadline = time.monotonic() + wait_s
    while any(map(_alive, pids)) and time.monotonic() < deadline:
        time.sleep(0.1)
    left = [p for p in pids if _alive(p)]
    for p in left:
        os.kill(p, signal.SIGKILL)
    return len(left)


def kill_with_workers(argv, sig, marker_dir, workers):
    """Kill an explore whose pool workers are all busy; report which workers outlive it."""
    def stand_in():
        import pvsource.explore as ex

        global MARKERS
        MARKERS = marker_dir
        ex.evaluate = busy  # the forked workers inherit it

    pid = _fork_cli(argv, stand_in)
    deadline = time.monotonic() + 240
    while len(os.listdir(marker_dir)) < workers and time.monotonic() < deadline:
        if os.waitpid(pid, os.WNOHANG)[0]:
            return {"signal": sig, "failed": "the explore ended before its workers were busy"}
        time.sleep(0.05)
    found = [int(name) for name in os.listdir(marker_dir)]
    os.kill(pid, getattr(signal, sig))
    _, status = os.waitpid(pid, 0)
    return {"signal": sig, "workers": len(found), "left": _survivors(found),
            "exit": os.WEXITSTATUS(status) if os.WIFEXITED(status) else -os.WTERMSIG(status)}


def _children(pid: int) -> list[int]:
    found = []
    for name in os.listdir("/proc"):
        if name.isdigit():
            try:
                with open(f"/proc/{name}/stat") as f:
                    if int(f.read().rsplit(")", 1)[1].split()[1]) == pid:
                        found.append(int(name))
            except (OSError, IndexError, ValueError):
                pass
    return found


def kill_tree(argv, workers):
    """SIGKILL a run once it has started ``workers`` child processes; report which outlive it."""
    pid = _fork_cli(argv)
    deadline = time.monotonic() + 240
    found = []
    while time.monotonic() < deadline:
        found = [c for c in _children(pid) if _alive(c)]
        if len(found) >= workers:
            break
        if os.waitpid(pid, os.WNOHANG)[0]:
            return {"failed": "the run ended before its workers started"}
        time.sleep(0.1)
    time.sleep(1.0)
    found = [c for c in _children(pid) if _alive(c)]
    os.kill(pid, signal.SIGKILL)
    os.waitpid(pid, 0)
    return {"signal": "SIGKILL", "children": len(found), "left": _survivors(found)}


def main():
    spec = json.loads(sys.argv[1])
    import pvsource.cli  # noqa: F401 - imported once, before the forks

    if "kill_tree" in spec:
        print(json.dumps(kill_tree(spec["kill_tree"], spec["workers"])), flush=True)

    for sig, marker_dir in spec.get("kill_workers", []):
        print(json.dumps(kill_with_workers(spec["argv"], sig, marker_dir, spec["workers"])), flush=True)

    for run in spec.get("runs", []):
        sig, hook, n = run["point"]
        pid = _fork_cli(run["argv"], lambda: arm(sig, hook, n, spec.get("marker")))
        _, status = os.waitpid(pid, 0)
        ended = {"signal": os.WTERMSIG(status)} if os.WIFSIGNALED(status) else {"exit": os.WEXITSTATUS(status)}
        print(json.dumps({"point": [sig, hook, n], **ended}), flush=True)


if __name__ == "__main__":
    main()
