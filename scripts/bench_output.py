"""Cost of safe output beside plain writes, measured in the same run.

Times, one after the other, in a temporary folder on the same file system:

1. N small files written with plain ``open().write()`` (the floor);
2. the same N files through :func:`jjpattern.outdir.write_text` (temporary file
   with ``O_EXCL``, ``fsync``, rename);
3. M report-like folders of K files written plainly into ``os.makedirs`` folders;
4. the same M folders through :func:`jjpattern.outdir.replace_folder` (built beside,
   marker written, swapped in over the previous folder under a lock).

The figures are per file or per folder; what matters is the ratio, and that the
per-folder cost stays small beside rendering a report's figures (about a second).

Run: python scripts/bench_output.py --files 500 --folders 50 --per-folder 8
"""

from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import time


def _plain_file(path, text):
    with open(path, "w", encoding="utf-8") as handle:
        handle.write(text)


def main(argv=None) -> None:
    from jjpattern import outdir

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--files", type=int, default=500)
    parser.add_argument("--folders", type=int, default=50)
    parser.add_argument("--per-folder", type=int, default=8)
    parser.add_argument("--size", type=int, default=20_000, help="bytes per file")
    args = parser.parse_args(argv)
    text = "x" * (args.size - 1) + "\n"
    root = tempfile.mkdtemp(prefix="jjpattern-bench-output-")
    try:
        rows = []
        for label, write in (("plain open().write()", _plain_file),
                             ("outdir.write_text", outdir.write_text)):
            folder = os.path.join(root, label.split(".")[0].split()[0])
            os.makedirs(folder)
            start = time.perf_counter()
            for k in range(args.files):
                write(os.path.join(folder, f"f{k % 50}.txt"), text)  # replacing, as reruns do
            rows.append((label, (time.perf_counter() - start) / args.files, "file"))

        def plain_folder(target):
            shutil.rmtree(target, ignore_errors=True)
            os.makedirs(target)
            for k in range(args.per_folder):
                _plain_file(os.path.join(target, f"f{k}.txt"), text)

        def safe_folder(target):
            with outdir.replace_folder(target) as build:
                for k in range(args.per_folder):
                    outdir.write_text(os.path.join(build, f"f{k}.txt"), text)

        for label, write in (("rmtree + makedirs + plain writes", plain_folder),
                             ("outdir.replace_folder", safe_folder)):
            target = os.path.join(root, "rep-" + label.split()[0].replace(".", ""))
            start = time.perf_counter()
            for _ in range(args.folders):
                write(target)
            rows.append((label, (time.perf_counter() - start) / args.folders, "folder"))
        print(f"{args.files} files of {args.size} B; {args.folders} folders of "
              f"{args.per_folder} files; {root}")
        for label, seconds, unit in rows:
            print(f"  {label:34s} {seconds * 1e3:8.3f} ms per {unit}")
        print(f"  ratio, files:   {rows[1][1] / rows[0][1]:.2f} x")
        print(f"  ratio, folders: {rows[3][1] / rows[2][1]:.2f} x")
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
