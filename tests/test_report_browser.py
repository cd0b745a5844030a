"""The offline HTML report: self-contained, printable, and drawn by a real browser (headless Chromium)."""
from __future__ import annotations

import re
import shutil
import struct
import subprocess
import zlib

import pytest

from crewcut.cli.main import main
from crewcut.plans.planfile import write_plan
from crewcut.reports.svgmap import PALETTE
from helpers.plans import make_plan

BROWSERS = ("chromium", "chromium-browser")  # Debian's package installs /usr/bin/chromium


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    d = tmp_path_factory.mktemp("report")
    plan = make_plan(k=3)
    path = write_plan(plan, d / "plan.json")
    out = d / "report.html"
    assert main(["--quiet", "report", str(path), "--out", str(out)]) == 0
    return plan, path, out


def test_report_is_self_contained_and_printable(report):
    plan, path, out = report
    page = out.read_text(encoding="utf-8")
    # nothing fetched: no links to other files or hosts, no scripts; the only URL is the SVG namespace
    assert not re.search(r"""(src|href)\s*=\s*["'](?!#)""", page)
    assert "<script" not in page and "<link" not in page and "@import" not in page and "url(" not in page
    assert set(re.findall(r"https?://[^\s\"'<>]+", page)) == {"http://www.w3.org/2000/svg"}
    # printing: a page per crew, colours kept
    assert "@media print" in page and "@page" in page and "print-color-adjust: exact" in page
    assert page.count('<div class="crewpage"') == len(plan.crews)
    assert "Workload per crew" in page and page.count("<svg") == 1 + len(plan.crews)
    for c in plan.crews:
        assert f"Route sheet &ndash; {c.id}" in page


def test_report_same_plan_same_bytes(report, tmp_path):
    _plan, path, out = report
    again = tmp_path / "again.html"
    assert main(["--quiet", "report", str(path), "--out", str(again)]) == 0
    assert again.read_bytes() == out.read_bytes()


def test_report_bad_plan(tmp_path, capsys):
    bad = tmp_path / "plan.json"
    bad.write_text('{"format": "crewcut-plan", "version": 1}')
    out = tmp_path / "r.html"
    assert main(["report", str(bad), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "network" in err and "Traceback" not in err and not out.exists()


# --- a tiny PNG reader (PNG specification, ISO/IEC 15948: chunks, zlib stream, filters 0-4) ----
def read_png(data: bytes) -> tuple[int, int, int, bytearray]:
    """(width, height, bytes per pixel, raw pixel rows) of an 8-bit, non-interlaced RGB or RGBA PNG."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos, idat = 8, []
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            w, h, depth, ctype, _c, _f, interlace = struct.unpack(">IIBBBBB", body)
            assert depth == 8 and ctype in (2, 6) and interlace == 0
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat.append(body)
        pos += 12 + n
    raw = zlib.decompress(b"".join(idat))
    stride = w * bpp
    out = bytearray(h * stride)
    prev = bytearray(stride)
    for y in range(h):
        ft = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        if ft == 1:
            for i in range(bpp, stride):
                line[i] = (line[i] + line[i - bpp]) & 255
        elif ft == 2:
            line = bytearray((a + b) & 255 for a, b in zip(line, prev))
        elif ft == 3:
            for i in range(stride):
                left = line[i - bpp] if i >= bpp else 0
                line[i] = (line[i] + ((left + prev[i]) >> 1)) & 255
        elif ft == 4:
            for i in range(stride):
                a = line[i - bpp] if i >= bpp else 0
                b = prev[i]
                c = prev[i - bpp] if i >= bpp else 0
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[i] = (line[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
        out[y * stride:(y + 1) * stride] = line
        prev = line
    return w, h, bpp, out


def _colour_counts(w: int, h: int, bpp: int, px: bytearray) -> dict[tuple[int, int, int], int]:
    counts: dict[tuple[int, int, int], int] = {}
    for i in range(0, w * h * bpp, bpp):
        key = (px[i], px[i + 1], px[i + 2])
        counts[key] = counts.get(key, 0) + 1
    return counts


def _rgb(hex_colour: str) -> tuple[int, int, int]:
    return tuple(int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))


def test_browser_draws_one_colour_per_crew(report, tmp_path):
    browser = next((shutil.which(b) for b in BROWSERS if shutil.which(b)), None)
    if browser is None:
        pytest.skip("no headless browser found (looked for chromium, chromium-browser); "
                    "install Debian's 'chromium' package to run this check")
    plan, _path, out = report
    shot = tmp_path / "shot.png"
    cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--hide-scrollbars", "--force-color-profile=srgb", f"--user-data-dir={tmp_path / 'profile'}",
           f"--screenshot={shot}", "--window-size=1000,1150", out.resolve().as_uri()]
    proc = subprocess.run(cmd, capture_output=True, timeout=120)
    assert shot.is_file(), f"browser wrote no screenshot: {proc.stderr.decode(errors='replace')[-500:]}"
    w, h, bpp, px = read_png(shot.read_bytes())
    assert (w, h) == (1000, 1150)
    counts = _colour_counts(w, h, bpp, px)
    white = counts.get((255, 255, 255), 0)
    assert white < 0.97 * w * h  # not blank
    # every crew's colour is on screen (table chips, territory lines, legend), and no colour
    # of a crew that is not in the plan; exact pixel values, as flat fills are not blended
    for i, _c in enumerate(plan.crews):
        assert counts.get(_rgb(PALETTE[i]), 0) >= 200, f"crew {i} colour {PALETTE[i]} missing"
    for extra in PALETTE[len(plan.crews):]:
        assert counts.get(_rgb(extra), 0) == 0
