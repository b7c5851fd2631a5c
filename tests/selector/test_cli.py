"""The `loadline select` command: CSV in, table or JSON out, exit codes."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from server.selector.cli import EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_OK, main

# Cormen et al., Introduction to Algorithms, 3rd ed., section 16.2 (from memory): 220 with 2, 3.
CLRS = "key,effort,value\n1,10,60\n2,20,100\n3,30,120\n"


def _csv(tmp_path: Path, text: str, name: str = "plan.csv") -> str:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_table_output(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code = main([_csv(tmp_path, CLRS), "--capacity", "50"])
    out = capsys.readouterr().out
    assert code == EXIT_OK
    assert "Chosen 2 of 3: value 220, effort 50.0 of 50.0 days, headroom 0.0 days" in out
    assert "Method: dp" in out
    lines = [line for line in out.splitlines() if line.startswith("*")]
    assert [line.split()[1] for line in lines] == ["2", "3"]


def test_json_output(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code = main([_csv(tmp_path, CLRS), "--capacity", "50", "--json", "--curve", "--explain"])
    body = json.loads(capsys.readouterr().out)
    assert code == EXIT_OK
    assert body["chosen"] == ["2", "3"]
    assert body["value"] == 220
    assert body["method"] == "dp"
    assert body["curve"]["capacity_days"][-1] == 62.5
    assert [e["key"] for e in body["explanations"]] == ["1", "2", "3"]


def test_marks_columns(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    text = (
        "key,effort,value,pinned,ruled_out,needs,either_or\n"
        "api,3,1,,,,\n"
        "ui,2,10,yes,,api,\n"
        "build,4,9,,,,delivery\n"
        "buy,2,8,,,,delivery\n"
        "x,1,100,,TRUE,,\n"
    )
    code = main([_csv(tmp_path, text), "--capacity", "7", "--json"])
    body = json.loads(capsys.readouterr().out)
    assert code == EXIT_OK
    assert body["chosen"] == ["api", "ui", "buy"]
    assert body["forced_by_needs"] == ["api"]


def test_set_names_typed_another_way_are_one_set(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # All three fit (6 days) and would be worth 20; "Delivery" and " delivery" are one set,
    # so at most one of build and buy is chosen. By hand: build 9 + rest 3 = 12 is best.
    text = "key,effort,value,either_or\nbuild,2,9,Delivery\nbuy,2,8, delivery\nrest,2,3,\n"
    code = main([_csv(tmp_path, text), "--capacity", "6", "--json"])
    body = json.loads(capsys.readouterr().out)
    assert code == EXIT_OK
    assert body["chosen"] == ["build", "rest"]
    assert body["value"] == 12


def test_infeasible_pinned_work_exits_1(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    text = "key,effort,value,pinned\na,5,1,1\nb,6,1,1\n"
    code = main([_csv(tmp_path, text), "--capacity", "10"])
    out = capsys.readouterr().out
    assert code == EXIT_INFEASIBLE
    assert "Pinned work needs 11.0 days, 1.0 days over the capacity of 10.0 days." in out


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("key,effort,value\na,-1,3\n", "row 2: initiative 'a': effort must be greater than zero"),
        ("key,effort,value\na,abc,3\n", "row 2 (key 'a'): effort must be a number"),
        ("key,effort,value\na,1,0\n", "row 2: initiative 'a': value must be greater than zero"),
        ("key,effort,value\na,1,nan\n", "value must be a number, got NaN"),
        ("key,effort,value\na,1,2\na,2,3\n", "row 3 (key 'a'): key is used again (first on row 2)"),
        ("key,effort,value,needs\na,1,2,ghost\n", "row 2: initiative 'a': needs names unknown key"),
        ("key,effort,value,needs\na,1,2,b\nb,1,2,a\n", "needs cycle: a -> b -> a"),
        ("key,effort,value,pinned\na,1,2,maybe\n", "row 2 (key 'a'): pinned must be true/false"),
        ("key;effort;value\na;1;2\n", "not comma-separated"),
        ("key,effort\na,1\n", "missing column value"),
        ("key,effort,value\n=cmd(),1,2\n", "looks like a spreadsheet formula"),
        ("key,effort,value\na,1,2,3\n", "row 2: has 4 cells but the header has 3"),
        ("", "the file is empty"),
        ("key,effort,value\na,1\u00a02,2\n", "effort must be a number"),
        ('key,effort,value\na,"1,5",2\n', "use a point for decimals"),
    ],
)
def test_bad_input_exits_2_naming_row_and_field(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, words: str
) -> None:
    code = main([_csv(tmp_path, text), "--capacity", "10"])
    captured = capsys.readouterr()
    assert code == EXIT_BAD_INPUT
    assert words in captured.err
    assert captured.out == ""


def test_bad_capacity_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main([_csv(tmp_path, CLRS), "--capacity", "0"]) == EXIT_BAD_INPUT
    assert "capacity must be greater than zero" in capsys.readouterr().err
    assert main([_csv(tmp_path, CLRS), "--capacity", "ten"]) == EXIT_BAD_INPUT
    assert main([_csv(tmp_path, CLRS)]) == EXIT_BAD_INPUT  # --capacity is required


def test_missing_file_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main([str(tmp_path / "nope.csv"), "--capacity", "5"]) == EXIT_BAD_INPUT
    assert "cannot read" in capsys.readouterr().err


def test_ignored_columns_are_reported(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    text = "key,title,effort,value\na,First,1,2\n"
    assert main([_csv(tmp_path, text), "--capacity", "5"]) == EXIT_OK
    assert "ignoring column title" in capsys.readouterr().err


def test_help_exits_0(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--help"]) == 0
    assert "loadline select" in capsys.readouterr().out
