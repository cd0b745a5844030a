"""Digests of everything the demo writes, to show that a change kept the outputs' bytes.

Runs the installed command line (``crewcut`` beside this Python) on the demo town:
the demo itself (town, config, one-crew plan, fleet plan, sheets, map, report,
GeoJSON and GPX), then the table in every format, the sheets in every format, the
CSV export and a rebalance with one crew absent. Prints one line per output file or
printed table: ``sha256  name``. Run it before and after a change and diff the two::

    .venv/bin/python tests/demo_digest.py > before.txt
    # ... change the code, reinstall ...
    .venv/bin/python tests/demo_digest.py > after.txt
    diff before.txt after.txt && echo "byte-identical"

``--compare FILE`` does the diff itself and exits 1 on any difference. Paths that
the command line prints are replaced by a placeholder and wall-clock times in
printed text are masked; the files are written in one fixed temporary folder.
"""
from __future__ import annotations

import argparse
import hashlib
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

CREWCUT = str(Path(sys.executable).with_name("crewcut"))


def _run(argv: list[str], root: Path) -> bytes:
    done = subprocess.run([CREWCUT, *argv], capture_output=True, cwd=root, env={"COLUMNS": "160", "PATH": ""},
                          check=False)
    if done.returncode != 0:
        sys.exit(f"crewcut {' '.join(argv)} failed with {done.returncode}:\n{done.stderr.decode()}")
    return done.stdout


def _mask(text: bytes, root: Path) -> bytes:
    out = text.replace(str(root).encode(), b"<root>")
    return re.sub(rb"\d+\.\d+ s\b", b"<t> s", out)  # elapsed times differ between runs


def digests() -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    # A fixed folder, not a fresh temporary one: a rebalanced plan records its parent's
    # path and SHA-256, and the GPX names its source, so the path must not vary.
    root = Path(tempfile.gettempdir()) / "crewcut-demo-digest"
    shutil.rmtree(root, ignore_errors=True)
    root.mkdir()
    try:
        demo = root / "demo"
        _run(["demo", "--out", str(demo)], root)
        plan = demo / "fleet" / "plan.json"
        for fmt in ("terminal", "csv", "md", "json"):
            rows.append((f"table --format {fmt} (stdout)",
                         hashlib.sha256(_mask(_run(["table", str(plan), "--format", fmt], root), root)).hexdigest()))
        for fmt in ("txt", "md", "html"):
            _run(["sheets", str(plan), "--format", fmt, "--out", str(root / f"sheets-{fmt}")], root)
        _run(["export", str(plan), "--format", "csv", "--out", str(root / "export.csv")], root)
        _run(["rebalance", str(plan), "--network", str(demo / "tallowmere.geojson"), "--config",
              str(demo / "tallowmere.toml"), "--absent", "sweeper-3", "--out", str(root / "rebalanced")], root)
        for path in sorted(p for p in root.rglob("*") if p.is_file()):
            data = path.read_bytes()
            rows.append((str(path.relative_to(root)), hashlib.sha256(data).hexdigest()))
    finally:
        shutil.rmtree(root, ignore_errors=True)
    return rows


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--compare", metavar="FILE", help="digests printed by an earlier run; exit 1 on a difference")
    args = parser.parse_args()
    lines = [f"{digest}  {name}" for name, digest in digests()]
    if not args.compare:
        print("\n".join(lines))
        return 0
    before = Path(args.compare).read_text().splitlines()
    if before == lines:
        print(f"byte-identical: {len(lines)} outputs")
        return 0
    for line in sorted(set(before) ^ set(lines)):
        print(("- " if line in before else "+ ") + line)
    return 1


if __name__ == "__main__":
    raise SystemExit(main())
