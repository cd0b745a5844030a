"""Every route sheet, map and report carries the cautions (project rule: heavy vehicles in
streets can hurt people; outputs defer to local codes, traffic law and licensed practice)."""
from __future__ import annotations

import re

from crewcut.reports.caution import CAUTION, SHORT_CAUTION
from crewcut.reports.htmlreport import report_html
from crewcut.reports.sheets import crew_sheets, sheet_files, to_markdown, to_text
from crewcut.reports.svgmap import route_svg, territory_svg

from helpers.plans import make_plan


def test_every_sheet_map_and_report_page_carries_the_caution():
    plan = make_plan(k=3)
    for sheet in crew_sheets(plan, plan.crews):
        assert CAUTION in to_text(sheet) and CAUTION in to_markdown(sheet)
    for form in ("txt", "md", "html"):
        for _name, text in sheet_files(plan, plan.crews, form):
            # one caution per route sheet in the file
            assert text.count(CAUTION) == sum(len(c.routes) for c in plan.crews) or form != "html" and CAUTION in text
    assert SHORT_CAUTION in territory_svg(plan)
    for c in plan.crews:
        assert SHORT_CAUTION in route_svg(plan, c)
    html = report_html(plan)
    # the print style repeats a fixed caution on every printed page; each crew page has its sheets' cautions
    assert re.search(r'class="print-caution">[^<]*traffic law', html)
    pages = html.split('class="crewpage"')[1:]
    assert len(pages) == len(plan.crews) and all(CAUTION in p for p in pages)
