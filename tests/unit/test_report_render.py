"""The report stage end to end on small folders: self-contained HTML, the same sections in Markdown, the numbers
in JSON, a manifest with the hashes of what it read; missing parts marked; bad folders refused in one line."""

from __future__ import annotations

import base64
import html.parser
import io
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from PIL import Image

from adapt.common.io import hash_file, read_json
from adapt.config.report import ReportJob
from adapt.reporting.blocks import SECTIONS
from adapt.stages.report import run
from tests.unit.report_folders import write_all, write_prepared


class _Page(html.parser.HTMLParser):
    """Headings, image sources, every URL-bearing attribute and script tags of a page."""

    def __init__(self) -> None:
        super().__init__()
        self.h2, self.images, self.urls, self.scripts, self._in_h2 = [], [], [], 0, False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "h2":
            self._in_h2 = True
            self.h2.append("")
        if tag == "img":
            self.images.append(a.get("src", ""))
        if tag == "script":
            self.scripts += 1
        self.urls += [v for k, v in attrs if k in ("src", "href", "action", "data", "poster") and v]

    def handle_endtag(self, tag):
        if tag == "h2":
            self._in_h2 = False

    def handle_data(self, data):
        if self._in_h2:
            self.h2[-1] += data


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """One report over a full set of folders; a warning in the profile carries markup to be escaped."""
    root = tmp_path_factory.mktemp("report")
    cfg = write_all(root)
    profile = root / "prepared" / "profile.json"
    doc = read_json(profile)
    doc["warnings"] = ["<script>alert(1)</script>"]
    profile.write_text(json.dumps(doc), encoding="utf-8")
    before = {p: hash_file(p) for p in root.rglob("*") if p.is_file()}
    result = run(cfg)
    return root, before, result


def test_html_is_self_contained_with_every_section_in_order(made):
    root, _, result = made
    page = _Page()
    page.feed(Path(result["html"]).read_text(encoding="utf-8"))
    assert [re.sub(r"^\d+", "", h) for h in page.h2] == [title for _, title in SECTIONS]
    assert page.scripts == 0
    assert all(u.startswith(("data:image/png;base64,", "#")) for u in page.urls), page.urls
    assert len(page.images) == len(read_json(root / "report" / "report.json")["plots"]) >= 6
    for src in page.images:
        Image.open(io.BytesIO(base64.b64decode(src.split(",", 1)[1]))).verify()
    text = Path(result["html"]).read_text(encoding="utf-8")
    assert "@import" not in text and "url(" not in text  # no external style sheet or font


def test_markdown_has_the_same_sections_and_links_existing_plots(made):
    root, _, result = made
    md = Path(result["markdown"]).read_text(encoding="utf-8")
    assert re.findall(r"^## \d+\. (.+)$", md, flags=re.M) == [title for _, title in SECTIONS]
    links = re.findall(r"\]\((plots/[^)]+\.png)\)", md)
    assert links and all((root / "report" / link).is_file() for link in links)


def test_json_holds_the_verdict_and_manifest_hashes_the_files_read(made):
    root, _, result = made
    report = read_json(Path(result["json"]))
    assert report["verdict"]["difference"] == read_json(root / "compare" / "comparison.json")["verdict"][
        "adapted vs base"]["difference"]
    manifest = read_json(root / "report" / "manifest.json")
    assert manifest["job"] == "report" and manifest["status"] == "completed"
    scores = root / "score" / "base-domain" / "scores.json"
    assert manifest["inputs"][str(scores)] == hash_file(scores)


def test_cautions_come_last_and_say_it_is_not_advice(made):
    _, _, result = made
    md = Path(result["markdown"]).read_text(encoding="utf-8")
    last = md.split("## 8. Cautions", 1)[1]
    assert "not legal or medical advice" in last and "de-identify before training" in last
    assert "personal-data matches" in last  # the corpus audit found e-mails and an IBAN


def test_inputs_are_not_modified(made):
    _, before, _ = made
    assert {p: hash_file(p) for p in before} == before


def test_missing_parts_are_marked_on_the_page(tmp_path):
    prepared = write_prepared(tmp_path / "prepared")
    result = run(ReportJob(prepared_dir=str(prepared), out_dir=str(tmp_path / "r")))
    text = Path(result["html"]).read_text(encoding="utf-8")
    assert text.count('class="missing"') >= 4 and "not given (set compare_dir=" in text
    assert set(result["missing"]) == {"general_dir", "pretrain_dir", "score_dirs", "compare_dir"}


def test_text_from_the_folders_is_escaped(made):
    _, _, result = made
    text = Path(result["html"]).read_text(encoding="utf-8")
    assert "<script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text


def test_cli_refuses_a_foreign_folder_in_one_line(tmp_path):
    (tmp_path / "notes").mkdir()
    exe = Path(sys.executable).parent / "adapt-report"
    proc = subprocess.run([str(exe), f"compare_dir={tmp_path / 'notes'}", f"out_dir={tmp_path / 'r'}"],
                          capture_output=True, text=True, timeout=300)
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert proc.returncode == 2 and len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    assert lines[0].startswith("error: compare_dir=") and "not an output folder of this tool" in lines[0]
    assert not (tmp_path / "r" / "report.html").exists()


def test_files_without_the_expected_fields_render_with_dashes(tmp_path):
    """Other versions of the stages may write fewer fields: the report marks them missing instead of failing."""
    cfg = write_all(tmp_path)
    for name in ("prepared/profile.json", "general/profile.json", "pretrain/result.json", "compare/comparison.json",
                 "score/base-domain/scores.json", "score/adapted-domain/scores.json"):
        (tmp_path / name).write_text("{}", encoding="utf-8")
    (tmp_path / "pretrain" / "metrics.jsonl").write_text('{"phase": "train"}\n', encoding="utf-8")
    (tmp_path / "compare" / "predictions.jsonl").write_text('{"index": 0}\n', encoding="utf-8")
    result = run(cfg)
    page = _Page()
    text = Path(result["html"]).read_text(encoding="utf-8")
    page.feed(text)
    assert [re.sub(r"^\d+", "", h) for h in page.h2] == [title for _, title in SECTIONS]
    assert "—" in text and "comparison.json holds none" in text  # read, but it says little


def test_key_figures_under_the_verdict_come_from_the_folders(made):
    from adapt.reporting.glance import key_figures

    root, _, result = made
    report = read_json(Path(result["json"]))
    figures = {f.label: f for f in key_figures(report)}
    pair = next(p for p in report["pppl"]["pairs"] if p["texts"] == "domain")
    assert figures["pseudo-perplexity, domain"].value == f"× {pair['ratio']:.3f}"
    assert figures["downstream macro-F1"].value == "+0.130"  # comparison.json's verdict difference
    assert figures["adaptation cost"].value == "1,536 tokens"  # result.json tokens_seen
    assert "against the TF-IDF floor" in figures
    text = Path(result["html"]).read_text(encoding="utf-8")
    assert text.index('class="verdict') < text.index('class="glance"') < text.index('id="fig-headline"')
