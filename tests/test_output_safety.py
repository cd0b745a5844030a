"""Output targets and encodings: nothing written over an input, text safe in every format.

Sources: W3C XML 1.0 (5th ed.) section 2.2 (the characters a document may hold),
checked with Python's own XML parser; OWASP, "CSV Injection" (cells starting
with = + - @ tab or CR are formulas to spreadsheet programs); CommonMark 0.31
section 6.6 (raw HTML passes through Markdown) and 2.4 (backslash escapes).
"""
from __future__ import annotations

import os
import xml.etree.ElementTree as ET

import pytest

from crewcut.solve.errors import InputError

from crewcut.cli.outputs import check_folder, check_target
from crewcut.reports.textsafety import csv_cell, markdown_text, terminal_text, xml_attr, xml_replacements, xml_text

NASTY = ["a\x00b", "\x1b]0;title\x07", "x\ufffey", "\ud800", "<b>&</b>", "]]>", 'q"uote\'', "\x0c\x0b", "ok"]


@pytest.mark.parametrize("text", NASTY)
def test_xml_text_is_well_formed(text):
    doc = f'<r a="{xml_attr(text)}">{xml_text(text)}</r>'
    root = ET.fromstring(doc.encode("utf-8", "surrogatepass"))  # raises ParseError when not well-formed
    assert root.text.replace("\ufffd", "") == "".join(c for c in text if xml_replacements(c) == 0)
    assert root.get("a").replace("\ufffd", "") == root.text.replace("\ufffd", "")


@pytest.mark.parametrize("cell, safe", [("=1+2", "'=1+2"), ("+A1", "'+A1"), ("-2+3", "'-2+3"), ("@SUM(1)", "'@SUM(1)"),
                                        ("\tx", "'\tx"), ("\rx", "'\rx"), ("Elm Street", "Elm Street"), (-30.5, -30.5),
                                        (3, 3), (None, None)])
def test_csv_cell(cell, safe):
    assert csv_cell(cell) == safe


def test_markdown_text_escapes_html_and_breaks():
    out = markdown_text("<script>x</script> | *a*\nb")
    assert "<" not in out and "\n" not in out and r"\|" in out and r"\*a\*" in out


def test_terminal_text_strips_control_sequences():
    assert terminal_text("a\x1b]0;t\x07b\x1b[2Jc\u202ed\ttab\nline") == "a]0;tb[2Jcd\ttab\nline"


def test_target_that_is_an_input_is_refused(tmp_path):
    src = tmp_path / "plan.json"
    src.write_text("{}")
    with pytest.raises(InputError, match="never writes over its input"):
        check_target(src, [src])
    with pytest.raises(InputError, match="never writes over its input"):
        check_target(tmp_path / "." / "plan.json", [str(src)])
    link = tmp_path / "hard.json"
    os.link(src, link)
    with pytest.raises(InputError, match="never writes over its input"):
        check_target(link, [src])


def test_target_must_be_a_regular_file(tmp_path):
    (tmp_path / "real").write_text("x")
    (tmp_path / "link").symlink_to(tmp_path / "real")
    with pytest.raises(InputError, match="symbolic link"):
        check_target(tmp_path / "link", [])
    with pytest.raises(InputError, match="not a regular file"):
        check_target("/dev/null", [])
    with pytest.raises(InputError, match="is a folder"):
        check_target(tmp_path, [])
    with pytest.raises(InputError, match="which is a file, not a folder"):
        check_target(tmp_path / "real" / "out.svg", [])
    assert check_target(tmp_path / "new.svg", [tmp_path / "real"]) == tmp_path / "new.svg"


def test_folder_whose_file_would_replace_an_input(tmp_path):
    net = tmp_path / "plan.json"
    net.write_text("{}")
    with pytest.raises(InputError, match="never writes over its input"):
        check_folder(tmp_path, ["plan.json"], [net])
    with pytest.raises(InputError, match="is a file, not a folder"):
        check_folder(net, ["plan.json"], [])


@pytest.mark.parametrize("exc, status, said", [
    (OSError(28, "No space left on device", "/full/plan.json"), 3, "'/full/plan.json': No space left on device"),
    (PermissionError(13, "Permission denied", "/etc/crewcut.toml"), 3, "'/etc/crewcut.toml': Permission denied"),
    (InputError("crew 'a' is unknown", "give a crew of the plan"), 2, "error: crew 'a' is unknown"),
    (RecursionError(), 2, "nested too deeply"),
    (KeyboardInterrupt(), 130, "interrupted"),
])
def test_guard_maps_failures_to_statuses(exc, status, said):
    import io

    from rich.console import Console

    from crewcut.cli.guard import guarded

    err = io.StringIO()

    def work():
        raise exc

    assert guarded(work, Console(file=err, width=200)) == status
    assert said in err.getvalue() and "Traceback" not in err.getvalue()


def test_guard_prints_user_text_without_markup_or_control_sequences():
    import io

    from rich.console import Console

    from crewcut.cli.guard import guarded

    err = io.StringIO()

    def work():
        raise InputError("crew '[/]\x1b]0;x\x07' is unknown")

    assert guarded(work, Console(file=err, width=200)) == 2
    assert "crew '[/]]0;x' is unknown" in err.getvalue()


def test_commands_never_write_over_their_inputs(tmp_path, capsys):
    """Every command that writes refuses an --out that is one of its inputs; the input stays byte-identical.

    README, "Bad input" (the project's rule: outputs never replace inputs; common practice, no source).
    """
    from crewcut.cli.main import main

    town = tmp_path / "plan.json"  # a street network that happens to be called plan.json
    assert main(["-q", "demo", "--only-town", "--segments", "200", "--out", str(tmp_path / "t")]) == 0
    town.write_bytes((tmp_path / "t" / "tallowmere.geojson").read_bytes())
    net_bytes = town.read_bytes()
    assert main(["-q", "plan", str(town), "--crews", "2", "--depot=-30.5,45.2", "--out", str(tmp_path)]) == 2
    assert town.read_bytes() == net_bytes
    assert main(["-q", "plan", str(town), "--crews", "2", "--depot=-30.5,45.2", "--out", str(tmp_path / "p"),
                 "--workers", "1"]) == 0
    plan = tmp_path / "p" / "plan.json"
    plan_bytes = plan.read_bytes()
    for argv in (["map", str(plan), "--out", str(plan)], ["report", str(plan), "--out", str(plan)],
                 ["export", str(plan), "--format", "geojson", "--out", str(town)],
                 ["sheets", str(plan), "--out", str(plan)],
                 ["rebalance", str(plan), "--network", str(town), "--absent", "crew-1", "--out", str(tmp_path / "p")],
                 ["map", str(plan), "--out", "/dev/null"]):
        code = main(["-q", *argv])
        assert code == 2, argv
        assert plan.read_bytes() == plan_bytes and town.read_bytes() == net_bytes, argv
    err = capsys.readouterr().err
    assert "never writes over its input" in err and "not a regular file" in err


def test_full_stdout_is_an_environment_failure(tmp_path):
    """Writing to a full device (/dev/full on Linux) exits 3 naming standard output, with no traceback."""
    import subprocess
    import sys

    from helpers.plans import make_plan

    from crewcut.plans.planfile import write_plan

    plan = write_plan(make_plan(k=2), tmp_path / "plan.json")
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "crewcut", "table", str(plan), "--format", "csv"],
                              stdout=full, stderr=subprocess.PIPE, text=True)
    assert done.returncode == 3 and "standard output: No space left on device" in done.stderr
    assert "Traceback" not in done.stderr
