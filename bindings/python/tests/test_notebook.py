"""The notebook-style example of docs/ runs and its cells hold."""

import ast
import runpy

import headroom
from conftest import ROOT


def test_the_python_notebook_runs(capsys):
    runpy.run_path(str(ROOT / "docs" / "python-notebook.py"), run_name="__main__")
    out = capsys.readouterr().out
    assert "50 collars: loss" in out
    assert "margin" in out


def test_every_public_name_has_a_stub():
    stub = (ROOT / "bindings" / "python" / "python" / "headroom" / "__init__.pyi").read_text()
    tree = ast.parse(stub)
    named = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.ClassDef)):
            named.add(node.name)
        elif isinstance(node, ast.AnnAssign) and isinstance(node.target, ast.Name):
            named.add(node.target.id)
        elif isinstance(node, ast.ImportFrom):
            named.update(a.asname or a.name for a in node.names)
    assert set(headroom.__all__) <= named, set(headroom.__all__) - named


def test_the_readme_example_runs_and_its_fleet_is_the_cli(cli_json, capsys):
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## From Python and on a Dask cluster", 1)[1]
    code = section.split("```python\n", 1)[1].split("```", 1)[0]
    exec(compile(code, "README.md", "exec"), {"__name__": "__main__"})
    printed = capsys.readouterr().out.split()
    fleet = cli_json("replay", "examples/logs", "--set", "target_outage=2%")["fleet"]
    assert [float(x) for x in printed[-2:]] == [fleet["outage_fraction"], fleet["mean_tx_dbm"]]
