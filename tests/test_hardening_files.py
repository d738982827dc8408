"""Issue #18: what the commands do with odd files when the answer is not a refusal: a job
file never chooses where its report goes, the listing goes on past bad files, exports show
hostile text as text, YAML numbers with an exponent, captures streamed in chunks, a full
disk during record."""

from __future__ import annotations

import csv
import io
import os
from pathlib import Path

import pytest

from cli_helpers import run_cli
from trueturn.errors import UserError
from trueturn.files import atomic_write_text, check_output
from trueturn.jobs.report import csv_text_cell, markdown_report, readings_csv, report_file_name
from trueturn.jobs.store import read_document
from trueturn.link.capture import CHUNK_BYTES, CaptureReader, CaptureWriteError, CaptureWriter
from trueturn.yamltext import load_yaml_text

JOB = Path(__file__).resolve().parent / "data" / "demo_bench_grinder_job.yaml"


def _job_with(tmp_path: Path, **fields: str) -> Path:
    text = JOB.read_text(encoding="utf-8")
    for key, value in fields.items():
        lines = text.splitlines()
        at = next(i for i, line in enumerate(lines) if line.startswith(f"{key}:"))
        lines[at] = f"{key}: {value}"
        text = "\n".join(lines) + "\n"
    path = tmp_path / "job.yaml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize("job_id", ['"../../evil"', '"/tmp/abs-evil"', '"..hidden"',
                                    '"a\\u0000b"', '"sub/dir\\\\name"'])
def test_a_job_file_never_chooses_where_its_report_goes(tmp_path: Path, job_id: str,
                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    job = _job_with(tmp_path, job_id=job_id)
    work = tmp_path / "here"
    work.mkdir()
    monkeypatch.chdir(work)
    code, _, err = run_cli(["report", str(job), "--workspace", str(tmp_path / "ws")])
    assert code == 0, err
    written = list(work.iterdir())
    assert len(written) == 1 and written[0].suffix == ".html", written
    assert not written[0].name.startswith((".", "-"))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["here", "job.yaml"]


def test_report_file_name_keeps_only_safe_characters() -> None:
    assert report_file_name("2026-11-28-fan-001", "md") == "2026-11-28-fan-001.md"
    assert report_file_name("../../x", "html") == "x.html"
    assert report_file_name("/etc/passwd", "html") == "etc-passwd.html"
    assert report_file_name("", "html") == "report.html"
    assert len(report_file_name("a" * 500, "html")) == 105


def test_outputs_refuse_links_and_odd_targets_and_missing_folders(tmp_path: Path) -> None:
    real = tmp_path / "real.txt"
    real.write_text("keep")
    (tmp_path / "link").symlink_to(real)
    os.mkfifo(tmp_path / "fifo")
    for target, words in ((tmp_path / "link", "symbolic link"), (tmp_path / "fifo", "FIFO"),
                          (tmp_path, "folder"), (Path("/dev/null"), "device"),
                          (tmp_path / "no" / "x.txt", "does not exist")):
        with pytest.raises(UserError, match=words):
            atomic_write_text(target, "new")
    assert real.read_text() == "keep" and (tmp_path / "link").is_symlink()
    assert not (tmp_path / "no").exists()
    assert check_output(tmp_path / "fresh.txt") == tmp_path / "fresh.txt"


def test_markdown_report_shows_html_and_markdown_as_text(tmp_path: Path) -> None:
    job = read_document(_job_with(tmp_path, notes='"<script>alert(1)</script> [x](javascript:y) *b*"'),
                        "job")
    text = markdown_report(job)
    # CommonMark 0.30: raw HTML passes through unless escaped; an entity shows as text
    assert "<script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    # CommonMark 0.30, "Backslash escapes": \[ \* show the character, no link or emphasis
    assert "\\[x\\](javascript:y) \\*b\\*" in text


@pytest.mark.parametrize("cell", ["=1+2", "+1", "-1+cmd", "@SUM(A1)", "\tx", "\rx"])
def test_csv_text_cells_starting_like_a_formula_are_guarded(cell: str) -> None:
    # OWASP, "CSV Injection": prefix such cells with a single quote
    assert csv_text_cell(cell) == "'" + cell
    assert csv_text_cell("bearing A") == "bearing A"


def test_csv_export_guards_a_formula_in_a_run_label(tmp_path: Path) -> None:
    text = JOB.read_text(encoding="utf-8").replace("label: ", "label: \"=HYPERLINK(1)\" #", 1)
    path = tmp_path / "job.yaml"
    path.write_text(text)
    rows = list(csv.reader(io.StringIO(readings_csv(read_document(path, "job")))))
    assert rows[1][3] == "'=HYPERLINK(1)"
    assert all(not cell.startswith("=") for row in rows for cell in row)


def test_report_list_goes_on_past_bad_and_linked_files(tmp_path: Path) -> None:
    jobs = tmp_path / "ws" / "jobs"
    jobs.mkdir(parents=True)
    (jobs / "good.yaml").write_text(JOB.read_text(encoding="utf-8"))
    (jobs / "broken.yaml").write_text("kind: job\nschema_version: [\n")
    secret = tmp_path / "secret.yaml"
    secret.write_text(JOB.read_text(encoding="utf-8").replace(
        "2026-11-28-bench-grinder-200-mm-001", "SECRET-VALUE"))
    (jobs / "linked.yaml").symlink_to(secret)
    (jobs / "dangling.yaml").symlink_to(tmp_path / "gone.yaml")
    code, out, err = run_cli(["report", "--list", "--workspace", str(tmp_path / "ws")])
    assert code == 0, err
    assert "2026-11-28-bench-grinder-200-mm-001" in out
    assert "SECRET-VALUE" not in out + err
    for name in ("broken.yaml", "linked.yaml", "dangling.yaml"):
        assert f"{name}  unreadable" in out


def test_yaml_numbers_with_an_exponent_are_numbers() -> None:
    # YAML 1.2.2, 10.3.2 (core schema): [-+]?(\.[0-9]+|[0-9]+(\.[0-9]*)?)([eE][-+]?[0-9]+)?
    data = load_yaml_text("a: 1e-3\nb: 2.5E6\nc: -4e+2\nd: .5e1\ne: '1e-3'\nf: e3\n", "t")
    assert data == {"a": 0.001, "b": 2.5e6, "c": -400.0, "d": 5.0, "e": "1e-3", "f": "e3"}


def test_a_capture_is_read_in_chunks_of_bounded_size(tmp_path: Path) -> None:
    body = bytes(range(256)) * (3 * CHUNK_BYTES // 256 + 7)
    path = tmp_path / "c.cap"
    with CaptureWriter(path, {"requested": {"seconds": 1}}) as writer:
        writer.write(body)
    with CaptureReader(path) as reader:
        sizes = [len(chunk) for chunk in reader.chunks()]
        assert reader.metadata["requested"] == {"seconds": 1}
    assert max(sizes) <= CHUNK_BYTES and sum(sizes) == len(body) and len(sizes) == 4


def test_a_capture_write_error_keeps_what_was_written(tmp_path: Path) -> None:
    path = tmp_path / "c.cap"
    writer = CaptureWriter(path, {})
    writer.write(b"\x00abc\x00")
    os.close(writer._fd)  # the disk goes away: the next write fails as on a full disk
    writer._fd = os.open(os.devnull, os.O_RDONLY)
    with pytest.raises(CaptureWriteError) as failed:
        writer.write(b"more")
    writer.close()
    assert failed.value.bytes_kept == 5
    with CaptureReader(path) as reader:
        assert b"".join(reader.chunks()) == b"\x00abc\x00"
