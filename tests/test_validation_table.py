"""docs/validation.md against the tests it names, and the mutation list against the sources.

The rule: a test that compares sphex with something outside the project (a
reference library, a closed form, a handbook value, a fact of the trade)
names that source in a comment beside the check and carries
``@pytest.mark.reference``. In docs/validation.md it has a row in a table with
a "Source named in the test" column; a test without the marker appears only in
the tables without that column (internal consistency, error handling).
"""
from __future__ import annotations

import ast
import fnmatch
import re
import shlex
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
TESTS = ROOT / "tests"
TABLE = ROOT / "docs" / "validation.md"

# Test files whose tests are not marked yet: the adapter, command-line and dask tests, which
# are being split into new files. The tests they name on the page must exist; the marker and
# row rules skip them. This list is emptied when those files carry the marker.
NOT_YET_MARKED = ()

TEST_REF = re.compile(r"`(?P<file>test_\w+\.py)?::(?P<name>test_\w+)(?:\[[^\]`]*\])?`")


def collect_tests() -> dict[str, dict[str, bool]]:
    """{file name: {test function: carries @pytest.mark.reference}} for tests/test_*.py."""
    found = {}
    for path in sorted(TESTS.glob("test_*.py")):
        tree = ast.parse(path.read_text(), str(path))
        tests = {}
        for node in tree.body:
            if isinstance(node, ast.ClassDef) and node.name.startswith("Test"):
                raise AssertionError(f"{path.name}: test classes are not parsed here; use functions")
            if isinstance(node, ast.FunctionDef) and node.name.startswith("test_"):
                marks = {ast.unparse(d) for d in node.decorator_list}
                tests[node.name] = "pytest.mark.reference" in marks
        found[path.name] = tests
    return found


def table_rows() -> list[tuple[int, bool, list[tuple[str, str]]]]:
    """(line number, in an outside-source table?, [(file, test)]) for each row of the tables
    whose second column is "Test"; ``::name`` continues the file named before it in the cell."""
    rows = []
    kind = None  # None outside a table, else "outside", "internal" or "other"
    for number, line in enumerate(TABLE.read_text().splitlines(), 1):
        if not line.startswith("|"):
            kind = None
            continue
        cells = [c.strip() for c in re.split(r"(?<!\\)\|", line.strip())[1:-1]]  # "\|" stays in a cell
        if kind is None:  # the header row
            if len(cells) > 1 and cells[1] == "Test":
                kind = "outside" if len(cells) > 2 and cells[2].startswith("Source") else "internal"
            else:
                kind = "other"
            continue
        if kind == "other" or set(cells[0]) <= {"-", ":"}:
            continue
        refs, current = [], None
        for match in TEST_REF.finditer(cells[1]):
            current = match["file"] or current
            assert current, f"docs/validation.md:{number}: '::{match['name']}' follows no file name"
            refs.append((current, match["name"]))
        rows.append((number, kind == "outside", refs))
    return rows


def pending(file: str) -> bool:
    return any(fnmatch.fnmatch(file, pattern) for pattern in NOT_YET_MARKED)


def test_every_test_named_in_the_table_exists():
    tests = collect_tests()
    text = TABLE.read_text()
    missing = []
    for number, line in enumerate(text.splitlines(), 1):
        current = None
        for match in TEST_REF.finditer(line):
            current = match["file"] or current
            if current is None:
                missing.append(f"line {number}: ::{match['name']} without a file")
            elif match["name"] not in tests.get(current, {}):
                missing.append(f"line {number}: {current}::{match['name']}")
    assert not missing, ("docs/validation.md names tests that do not exist (renamed or removed? "
                         "correct the rows): " + "; ".join(missing))


def test_reference_tests_and_outside_source_rows_agree():
    tests = collect_tests()
    rows = table_rows()
    assert rows, "no table rows found in docs/validation.md"
    in_outside = {ref for _, outside, refs in rows if outside for ref in refs}
    unmarked = sorted(f"{f}::{t}" for f, t in in_outside
                      if not pending(f) and not tests.get(f, {}).get(t, False))
    assert not unmarked, ("these tests have a row under 'Source named in the test' but no "
                          "@pytest.mark.reference: mark them, or move the row to the internal "
                          "consistency table: " + ", ".join(unmarked))
    marked = {(f, t) for f, names in tests.items() if not pending(f)
              for t, is_reference in names.items() if is_reference}
    no_row = sorted(f"{f}::{t}" for f, t in marked - in_outside)
    assert not no_row, ("these tests carry @pytest.mark.reference but have no row in a table of "
                        "docs/validation.md with a 'Source named in the test' column: add one "
                        "(what is checked, the test, its source, the tolerance): " + ", ".join(no_row))


def test_every_test_has_a_row():
    tests = collect_tests()
    named = {ref for _, _, refs in table_rows() for ref in refs}
    missing = sorted(f"{f}::{t}" for f, names in tests.items() if not pending(f)
                     for t in names if (f, t) not in named)
    assert not missing, ("these tests have no row in docs/validation.md: add one in the table of "
                         "their area (outside source or internal consistency): " + ", ".join(missing))


def test_slow_tests_run_by_default():
    # the tests marked slow are the high-degree checks that catch some planted bugs alone:
    # nothing may deselect them in the default run, which is what CI runs
    pyproject = (ROOT / "pyproject.toml").read_text()
    addopts = re.search(r'^addopts\s*=\s*"([^"]*)"', pyproject, re.MULTILINE)
    assert addopts is None or "-m" not in shlex.split(addopts[1]), addopts[1]
    assert "pytest_collection_modifyitems" not in (TESTS / "conftest.py").read_text()
    for doc in (ROOT / ".ci" / "run", ROOT / "README.md"):
        command = re.search(r"python -m pytest([^\n&|;`]*)", doc.read_text())
        assert command, f"no pytest command in {doc.name}"
        assert "-m" not in shlex.split(command[1]), (doc.name, command[0])


def test_mutation_list_applies_to_the_sources():
    # every planted bug of tests/mutations.py still finds its snippet once in its file (and
    # the mutated file compiles), so the mutation run stays runnable as the code changes
    sys.path.insert(0, str(TESTS))
    import mutations

    problems = [f"{m.name}: {why}" for m in mutations.MUTATIONS if (why := mutations.check(m))]
    assert not problems, ("update tests/mutations.py (and run it): " + "; ".join(problems))
    tests = collect_tests()
    for m in mutations.MUTATIONS:
        for target in m.tests:
            file, _, name = target.partition("::")
            assert not name or name.split("[")[0] in tests[Path(file).name], (m.name, target)


def test_mutation_record_lists_every_mutation():
    # docs/validation.md records the last mutation run; it must cover the current list
    sys.path.insert(0, str(TESTS))
    import mutations

    text = TABLE.read_text()
    section = text.split("## Mutation testing", 1)
    assert len(section) == 2, "docs/validation.md has no '## Mutation testing' section"
    body = section[1].split("\n## ", 1)[0]
    recorded = set(re.findall(r"^\| `([\w-]+)` \|", body, re.MULTILINE))
    names = {m.name for m in mutations.MUTATIONS}
    assert recorded == names, (
        "the mutation record in docs/validation.md does not match tests/mutations.py: run "
        "'python tests/mutations.py --markdown' and paste its table; not recorded: "
        f"{sorted(names - recorded)}, recorded but gone: {sorted(recorded - names)}")


if __name__ == "__main__":  # pragma: no cover
    pytest.main([__file__, "-q"])
