"""The hostile-input corpus (tests/hostile_cases.py): every bad input is refused precisely by
``check`` -- naming the file and, where given, the row and column or key, with a fix -- every
odd-but-valid input is read correctly, nothing raises, and the inputs are byte-identical
afterwards."""

import hashlib
import os
from pathlib import Path

import pytest

from hostile_cases import CASES, make_project
from pipelines.config_problems import check_run_config_by_core


def hashes(root: Path) -> dict[str, str]:
    return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def _file_name(problem) -> str:
    return os.path.basename(problem.file.split(" [")[0])


def test_the_corpus_is_large_and_mixed():
    rejections = [case for case in CASES if case.file is not None]
    acceptances = [case for case in CASES if case.file is None]
    assert len(CASES) >= 100 and len(rejections) >= 80 and len(acceptances) >= 20


@pytest.mark.parametrize("case", CASES, ids=[case.name for case in CASES])
def test_hostile_input(tmp_path, case):
    config, core_folder = make_project(tmp_path)
    case.change(tmp_path, core_folder)
    before = hashes(tmp_path)
    grouped = check_run_config_by_core(config)  # any exception here is a traceback: the test fails
    problems = [p for _, found in grouped.values() for p in found]
    assert hashes(tmp_path) == before  # inputs untouched, nothing written
    if case.file is None:
        assert problems == [], [str(p) for p in problems]
        cores = [core for key, (core, _) in grouped.items() if core is not None]
        assert len(cores) == 1 and case.accept(cores[0])
        return
    matching = [p for p in problems
                if _file_name(p) == case.file
                and (case.row is None or p.row == case.row)
                and (case.column is None or p.column == case.column)
                and case.words in str(p)]
    assert matching, f"expected {case.file} row {case.row} column {case.column} '{case.words}':\n" + "\n".join(
        map(str, problems))
    assert all(p.fix for p in matching)
