"""Start-up cost: whole-process CPU of the command line beside ``python -c pass``.

Each command runs in a fresh process (best of ``--repeats``; CPU is user plus
system time of the child, which a loaded machine inflates less than wall
time). The heavy libraries a command imported are listed (from a child that
runs the same command and then prints what ``sys.modules`` holds), so an import
that creeps onto the analysis path shows by name. Target: ``analyze small.csv
--json`` at most 0.8 s CPU. ``python -X importtime -m jjpattern.cli --help``
gives the per-module figures behind these.

Run: python scripts/bench_startup.py [--input FILE] [--repeats 5]
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
from pathlib import Path

#: Libraries that cost a noticeable part of a second to import.
HEAVY = ("scipy.stats", "scipy.optimize", "scipy.special", "scipy.signal", "pandas",
         "matplotlib", "lmfit", "h5py", "uncertainties", "threadpoolctl")
DEMO = Path(__file__).resolve().parent.parent / "jjpattern" / "demo_data" / "kt14_j03.csv"


def _env():
    # The working tree first, whatever is installed.
    root = str(Path(__file__).resolve().parent.parent)
    return {**os.environ, "PYTHONPATH": os.pathsep.join(
        [root, *filter(None, [os.environ.get("PYTHONPATH")])])}


def child_cpu(argv, repeats=3) -> float:
    """Least user + system CPU seconds of ``argv`` run ``repeats`` times."""
    best = float("inf")
    for _ in range(repeats):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False,
                       env=_env())
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        best = min(best, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime))
    return best


def heavy_imports(cli_args) -> list[str]:
    """Heavy libraries in ``sys.modules`` after ``jjpattern.cli.main(cli_args)``."""
    code = ("import contextlib, io, sys\n"
            "from jjpattern.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    try:\n"
            f"        main({list(cli_args)!r})\n"
            "    except SystemExit:\n"
            "        pass\n"
            f"print(' '.join(m for m in {HEAVY!r} if m in sys.modules))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=_env(), check=False)
    return out.stdout.split()


def rows(input_path=DEMO, repeats=3):
    """``[(label, cpu_s, heavy modules)]``: the reference and the commands."""
    py = sys.executable
    out = [("python -c pass", child_cpu([py, "-c", "pass"], repeats), [])]
    for label, args in (("jjpattern --help", ["--help"]),
                        (f"jjpattern analyze {Path(input_path).name} --json",
                         ["analyze", str(input_path), "--json"])):
        cpu = child_cpu([py, "-m", "jjpattern.cli", *args], repeats)
        out.append((label, cpu, heavy_imports(args)))
    return out


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--input", default=str(DEMO))
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    results = rows(args.input, args.repeats)
    base = results[0][1]
    for label, cpu, heavy in results:
        extra = f" = {cpu / base:4.1f} x python -c pass" if label != results[0][0] else ""
        print(f"  {label:40s} {cpu:5.2f} s CPU{extra}"
              + (f" | imports {', '.join(heavy) or 'none of the heavy ones'}"
                 if label != results[0][0] else ""))
    print("  target: analyze at most 0.8 s CPU")


if __name__ == "__main__":
    main()
