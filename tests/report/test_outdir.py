"""Tests of planner.report.outdir: the output folder's contents and its safe replacement."""

from __future__ import annotations

import json

import pytest

from planner.errors import OutputError
from planner.report import outdir
from planner.report.outdir import MAX_BENCH_FILES, plan_files, write_output_folder
from tests.report.conftest import make_inputs, make_plan

DATE = "2031-02-03"


def _tree(folder):
    return {
        str(path.relative_to(folder)): path.read_bytes()
        for path in sorted(folder.rglob("*"))
        if path.is_file()
    }


@pytest.fixture
def old_folder(tmp_path):
    target = tmp_path / "out"
    (target / "sub").mkdir(parents=True)
    (target / "keep.txt").write_text("old results\n")
    (target / "sub" / "deep.txt").write_text("old deep\n")
    return target


def test_plan_files_one_sheet_per_bench(plan):
    files = plan_files(plan, date=DATE)
    for name in (
        "plan.json",
        "mixtures.csv",
        "prep-sheet.md",
        "prep-sheet.html",
        "answer-key.md",
        "answer-key.html",
        "bench-sheets.html",
    ):
        assert name in files
    benches = sorted(name for name in files if name.startswith("benches/"))
    # The fixture has 2 sections x 3 benches: a Markdown and an HTML sheet each.
    assert len(benches) == 12
    assert "benches/section-01-bench-01.md" in benches
    assert "benches/section-02-bench-03.html" in benches
    assert "Section 2 of 2" in files["benches/section-02-bench-03.md"]
    assert "Bench 3 of 3" in files["benches/section-02-bench-03.md"]
    assert files["bench-sheets.html"].count('<section class="page">') == 6
    assert json.loads(files["plan.json"])["schema"] == "planner.plan/1"
    assert DATE in files["prep-sheet.md"]


def test_plan_files_one_sheet_per_section_beyond_the_limit():
    plan = make_plan(make_inputs(sections=MAX_BENCH_FILES + 1, benches_per_section=1))
    files = plan_files(plan, date=DATE)
    benches = sorted(name for name in files if name.startswith("benches/"))
    assert len(benches) == 2 * (MAX_BENCH_FILES + 1)
    assert "benches/section-01.md" in benches
    assert "benches/section-61.html" in benches
    assert "Bench ______ of 1" in files["benches/section-61.md"]


def test_plan_files_at_the_limit_still_per_bench():
    plan = make_plan(make_inputs(sections=3, benches_per_section=MAX_BENCH_FILES // 3))
    files = plan_files(plan, date=DATE)
    assert "benches/section-03-bench-20.md" in files


def test_writes_a_new_folder_with_subfolders(tmp_path):
    target = tmp_path / "new" / "out"
    write_output_folder(target, {"a.txt": "é\n", "benches/b.bin": b"\x00\x01"}, force=False)
    assert _tree(target) == {"a.txt": "é\n".encode(), "benches/b.bin": b"\x00\x01"}
    assert sorted(p.name for p in target.parent.iterdir()) == ["out"]


def test_refuses_a_non_empty_folder_without_force(old_folder):
    before = _tree(old_folder)
    with pytest.raises(OutputError) as info:
        write_output_folder(old_folder, {"a.txt": "new"}, force=False)
    assert str(old_folder) in str(info.value)
    assert "--force" in str(info.value)
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_replaces_an_empty_folder_without_force(tmp_path):
    target = tmp_path / "out"
    target.mkdir()
    write_output_folder(target, {"a.txt": "new"}, force=False)
    assert _tree(target) == {"a.txt": b"new"}


def test_replaces_with_force(old_folder):
    write_output_folder(old_folder, {"a.txt": "new"}, force=True)
    assert _tree(old_folder) == {"a.txt": b"new"}
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_refuses_a_file_as_target(tmp_path):
    target = tmp_path / "out"
    target.write_text("a file")
    with pytest.raises(OutputError, match="not a folder"):
        write_output_folder(target, {"a.txt": "new"}, force=True)
    assert target.read_text() == "a file"


@pytest.mark.parametrize("error", [OSError(28, "No space left on device"), RuntimeError("bug")])
def test_fault_mid_write_leaves_old_folder_and_no_temp(old_folder, monkeypatch, error):
    before = _tree(old_folder)
    real_write = outdir._write_file
    calls = []

    def failing_write(path, data):
        calls.append(path)
        if len(calls) == 2:
            raise error
        real_write(path, data)

    monkeypatch.setattr(outdir, "_write_file", failing_write)
    expected = OutputError if isinstance(error, OSError) else RuntimeError
    with pytest.raises(expected):
        write_output_folder(old_folder, {"a.txt": "1", "b.txt": "2", "c.txt": "3"}, force=True)
    assert len(calls) == 2
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


def test_fault_in_final_rename_restores_old_folder(old_folder, monkeypatch):
    before = _tree(old_folder)
    real_replace = outdir.os.replace

    def failing_replace(source, destination):
        if str(source).endswith("new"):
            raise OSError(13, "Permission denied")
        real_replace(source, destination)

    monkeypatch.setattr(outdir.os, "replace", failing_replace)
    with pytest.raises(OutputError, match="left as it was"):
        write_output_folder(old_folder, {"a.txt": "1"}, force=True)
    assert _tree(old_folder) == before
    assert sorted(p.name for p in old_folder.parent.iterdir()) == ["out"]


@pytest.mark.parametrize(
    "name", ["../x", "a/../../x", "/etc/x", "a/..", "", ".", "C:/x", "a\\..\\x", "sub/../x"]
)
def test_rejects_names_outside_the_folder(tmp_path, name):
    target = tmp_path / "out"
    with pytest.raises(OutputError) as info:
        write_output_folder(target, {"ok.txt": "fine", name: "bad"}, force=True)
    assert info.value.field == "files"
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []


def test_rejects_a_file_name_used_as_a_folder(tmp_path):
    with pytest.raises(OutputError, match="also used as a folder"):
        write_output_folder(tmp_path / "out", {"a": "1", "a/b": "2"}, force=False)


def test_whole_plan_folder_round_trip(tmp_path, plan):
    files = plan_files(plan, date=DATE)
    target = tmp_path / "plan-out"
    write_output_folder(target, files, force=False)
    written = _tree(target)
    assert set(written) == set(files)
    assert written["plan.json"] == files["plan.json"].encode("utf-8")
