"""The demo town's report in headless Chromium: it renders, logs nothing, and draws a page.

The page holds no script, so any console line Chromium logs for it is a fault, and so is any
failed load (the page must ask for nothing). ``.ci/run`` installs Debian's chromium when it is
missing; the tests skip only when /usr/bin/chromium is absent.
"""

from __future__ import annotations

import re
import struct
import subprocess
import unicodedata
import zlib
from pathlib import Path

import pytest
from pypdf import PdfReader

from audit.pipeline import run
from audit.report import write_report

CHROMIUM = Path("/usr/bin/chromium")
TOWN = Path(__file__).resolve().parents[2] / "sample_gis" / "town.toml"
SECTIONS = ("caution", "summary", "totals", "map", "flooding", "flags", "part-full", "velocity", "candidates", "programme", "findings", "flows", "rules")
WINDOW = (1280, 3000)

pytestmark = pytest.mark.skipif(not CHROMIUM.exists(), reason="needs /usr/bin/chromium; .ci/run installs it with apt-get")


def chromium(tmp_path: Path, page: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    """Run headless Chromium on a local page with no network services and a throwaway profile."""
    command = [
        str(CHROMIUM), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        f"--user-data-dir={tmp_path / 'profile'}", "--enable-logging=stderr", "--v=0", *extra, page.as_uri(),
    ]  # fmt: skip
    return subprocess.run(command, capture_output=True, text=True, timeout=300, check=False)


def page_faults(log: str) -> list[str]:
    """Log lines that report a console message or a failed load."""
    return [line for line in log.splitlines() if re.search(r":CONSOLE|net::ERR_|Failed to load resource", line)]


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_report(run(TOWN), tmp_path_factory.mktemp("report") / "report.html", id_field="asset_ref")


def test_rendered_dom_holds_every_section_and_no_console_line(report: Path, tmp_path: Path) -> None:
    done = chromium(tmp_path, report, "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    for name in SECTIONS:
        assert f'<section id="{name}"' in done.stdout, name
    assert done.stdout.count("<svg") == 6  # map, long section, flag bars, part-full chart, velocity histogram, risk matrix
    assert page_faults(done.stderr) == []


def test_fault_detector_sees_a_console_message(tmp_path: Path) -> None:
    page = tmp_path / "noisy.html"
    page.write_text('<!DOCTYPE html><p>x</p><script>console.error("report-fault")</script>', encoding="utf-8")
    done = chromium(tmp_path, page, "--dump-dom")
    assert any("report-fault" in line for line in page_faults(done.stderr))


def png_size_and_rows(path: Path) -> tuple[int, int, int]:
    """Width, height and number of distinct filtered scanlines of an 8-bit PNG (standard library).

    A blank page filters to a handful of distinct scanlines; a drawn page to hundreds.
    """
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    chunks: dict[bytes, bytes] = {}
    offset = 8
    while offset < len(data):
        (length,) = struct.unpack(">I", data[offset : offset + 4])
        kind = data[offset + 4 : offset + 8]
        chunks[kind] = chunks.get(kind, b"") + data[offset + 8 : offset + 8 + length]
        offset += 12 + length
    width, height, depth, colour = struct.unpack(">IIBB", chunks[b"IHDR"][:10])
    assert depth == 8
    assert colour in (2, 6)
    stride = width * (3 if colour == 2 else 4) + 1
    raw = zlib.decompress(chunks[b"IDAT"])
    assert len(raw) == height * stride
    return width, height, len({raw[row * stride : (row + 1) * stride] for row in range(height)})


def test_screenshot_is_a_drawn_page(report: Path, tmp_path: Path) -> None:
    shot = tmp_path / "report.png"
    done = chromium(tmp_path, report, f"--screenshot={shot}", f"--window-size={WINDOW[0]},{WINDOW[1]}")
    assert done.returncode == 0, done.stderr[-2000:]
    assert shot.stat().st_size > 50_000
    width, height, distinct = png_size_and_rows(shot)
    assert (width, height) == WINDOW
    assert distinct > 200
    assert page_faults(done.stderr) == []


#: Paper sizes [pt] (ISO 216 A4 is 210 x 297 mm; US Letter 8.5 x 11 in).
PAPERS = {"A4": (595.28, 841.89), "letter": (612.0, 792.0)}


@pytest.mark.parametrize("paper", list(PAPERS))
def test_printed_report_keeps_sections_off_the_foot_of_a_page(report: Path, tmp_path: Path, paper: str) -> None:
    printed = tmp_path / f"report-{paper}.html"
    markup = report.read_text(encoding="utf-8")
    printed.write_text(markup.replace("</head>", f"<style>@page{{size:{paper}}}</style></head>", 1), encoding="utf-8")
    pdf = tmp_path / f"report-{paper}.pdf"
    done = chromium(tmp_path, printed, f"--print-to-pdf={pdf}", "--no-pdf-header-footer")
    assert done.returncode == 0, done.stderr[-2000:]
    reader = PdfReader(pdf)
    width, height = PAPERS[paper]
    assert all(abs(float(page.mediabox.width) - width) < 1 and abs(float(page.mediabox.height) - height) < 1 for page in reader.pages)
    assert 3 <= len(reader.pages) <= 14  # the demo town: a map, three charts and a few tables (13 pages of Letter since the bends)
    titles = {"Caution", "Summary", "Network totals", "Map of the network by worst flag", "Water levels and flooding", "Flags: pipes and length",
              "Load ratio against depth ratio", "Velocity at design flow", "Top 20 renewal candidates", "Renewal programme", "Data findings",
              "Design flows at the outfalls", "Rules and run"}  # fmt: skip
    lines: dict[tuple[int, float], str] = {}  # text runs joined by page and baseline
    for number, page in enumerate(reader.pages):

        def visit(text: str, cm: list[float], tm: list[float], _font: object, _size: object, number: int = number) -> None:
            # the baseline's height above the foot of the page [pt]: the text matrix's origin through the page's matrix
            key = (number, round(tm[4] * cm[1] + tm[5] * cm[3] + cm[5], 1))
            lines[key] = lines.get(key, "") + unicodedata.normalize("NFKC", text)  # "ﬂ" ligatures back to "fl"

        page.extract_text(visitor_text=visit)
    found: dict[str, tuple[int, float]] = {}
    for (number, y), text in sorted(lines.items(), key=lambda item: (item[0][0], -item[0][1])):
        if text.strip() in titles and text.strip() not in found:
            found[text.strip()] = (number, y)
    assert set(found) == titles
    # no section starts in the last 10 % of a page: its title would be parted from its content
    low = {title: y for title, (_, y) in found.items() if y < 0.10 * height}
    assert low == {}
    pages = [found[title][0] for title in ("Caution", "Summary", "Network totals")]
    assert pages == [0, 0, 0]  # the caution, the summary and the totals open the first page
