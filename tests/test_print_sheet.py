"""The printable one-page sheet (issue 27): its content from the plan's own
view, and the PDF that `dosing plan --pdf` writes.

The PDF is read back with pypdf (an outside reader, from the registry): one
page of A4 (595 x 842 pt, ISO 216) or Letter (612 x 792 pt, ANSI), with the
dose, the boxes' headings, the cautions and the final-word line as text.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import pytest

from dosing.errors import InputError
from dosing.io.scenario import load_scenario
from dosing.planning.job import make_plan
from dosing.planning.reagents import GENERAL_CAUTION
from dosing.planning.train_job import make_train
from dosing.report.print_pdf import print_pdf
from dosing.report.print_sheet import PrintSheet, print_sheet
from dosing.report.sheet import render_sheet
from tests.test_robustness import _one_line, run

pypdf = pytest.importorskip("pypdf")
ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))


def _sheet(path: Path) -> PrintSheet:
    scenario = load_scenario(path)
    plan = None if scenario.train else make_plan(scenario)
    return print_sheet(scenario, plan, make_train(scenario, plan), "metric", "2026-12-05 08:00")


def _pdf_text(data: bytes) -> tuple[int, str, tuple[float, float]]:
    reader = pypdf.PdfReader(io.BytesIO(data))
    box = reader.pages[0].mediabox
    text = " ".join(p.extract_text() for p in reader.pages)
    return len(reader.pages), " ".join(text.split()), (float(box.width), float(box.height))


@pytest.mark.slow
@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_every_demo_prints_on_one_page_with_the_final_word(path):
    sheet = _sheet(path)
    assert sheet.cautions[-1] == GENERAL_CAUTION
    pages, text, size = _pdf_text(print_pdf(sheet))
    assert pages == 1
    assert size == pytest.approx((595.4, 841.7), abs=1.0)       # A4: 210 x 297 mm
    assert "final word" in text and "licensed engineer" in text
    assert "Dosed by" in text and "Checked by" in text
    assert "pH read" in text                                    # a box to write in


def test_the_dose_on_paper_is_the_sheets_dose():
    path = ROOT / "scenarios" / "acid-rinse-caustic.toml"
    scenario = load_scenario(path)
    plan = make_plan(scenario)
    sheet = print_sheet(scenario, plan, None, "metric", "now")
    text_sheet = render_sheet(scenario, plan)
    first = re.search(r"First dose ([\d.]+ kg = [\d.]+ L)", text_sheet).group(1)
    assert any(first in s.text for s in sheet.steps)
    assert sheet.headline in " ".join(text_sheet.split())      # the sheet wraps it
    _, text, _ = _pdf_text(print_pdf(sheet, "letter"))
    assert first in text
    # The trim table on paper is the sheet's, row for row.
    for ph, add in sheet.trim:
        assert re.search(rf"{re.escape(ph)}\s+{re.escape(add)}", text_sheet)


def test_a_stream_sets_its_pump_rather_than_doses_a_batch():
    sheet = _sheet(ROOT / "scenarios" / "flow-metering-pump.toml")
    assert sheet.steps[0].text.startswith("Set the pump to ") and "/h" in sheet.steps[0].text
    assert sheet.steps[0].boxes == ("set at", "time")


def test_letter_paper_is_letter_sized():
    _, _, size = _pdf_text(print_pdf(_sheet(ROOT / "scenarios" / "flow-metering-pump.toml"),
                                     "letter"))
    assert size == pytest.approx((612.0, 792.0), abs=0.5)       # 8.5 x 11 in


def test_a_sheet_too_long_for_one_page_is_refused_not_cut():
    sheet = _sheet(ROOT / "scenarios" / "acid-rinse-caustic.toml")
    long = PrintSheet(**{**sheet.__dict__, "warnings": tuple(f"warning {i} " * 12
                                                               for i in range(400))})
    with pytest.raises(InputError, match="one page"):
        print_pdf(long)
    # Somewhat longer still fits, in smaller text.
    fits = PrintSheet(**{**sheet.__dict__, "warnings": sheet.warnings * 4})
    assert _pdf_text(print_pdf(fits))[0] == 1


def test_cli_writes_the_pdf_and_never_replaces_one_unasked(tmp_path):
    out = tmp_path / "sheet.pdf"
    scenario = str(ROOT / "scenarios" / "acid-rinse-caustic.toml")
    code, _, err = run("plan", scenario, "--pdf", str(out))
    assert code == 0, err
    assert out.read_bytes().startswith(b"%PDF")
    before = out.read_bytes()
    code, _, err = run("plan", scenario, "--pdf", str(out))
    assert code == 2 and out.read_bytes() == before
    _one_line(err, "--pdf")
    code, _, err = run("plan", scenario, "--pdf", str(tmp_path / "sheet.png"))
    assert code == 2 and not (tmp_path / "sheet.png").exists()
    _one_line(err, "PDF")
