"""User files are data, never code.

1. The source of pqcheck never evaluates text (``eval``, ``exec``, ``compile``, pandas
   ``DataFrame.eval``/``query``), never unpickles (``pickle``, ``dill``, ``marshal``, ``shelve``,
   ``joblib``, ``pandas.read_pickle``) and loads NumPy files with ``allow_pickle=False`` said
   explicitly. The scan walks the syntax tree of every module, so a word in a docstring or a
   comment does not count and a renamed import does not hide a call.
2. Text a person types (equipment, operator, site, title, plan notes) reaches the PDF literally:
   markup characters are shown, never interpreted (the report engineer's tests cover the
   escaping helpers; this is the end-to-end path through ``pqcheck report``).
"""

from __future__ import annotations

import ast
import io
import json
import re
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import write_without_observation

import pqcheck
from pqcheck.cli import main

SOURCE = Path(pqcheck.__file__).parent
MODULES = sorted(SOURCE.rglob("*.py"))

_EVALUATORS = {"eval", "exec", "compile", "__import__", "breakpoint"}
_PICKLERS = {"pickle", "cPickle", "_pickle", "dill", "cloudpickle", "marshal", "shelve",
             "joblib"}


def _calls(tree):
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            yield node


def _dotted(node) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return f"{_dotted(node.value)}.{node.attr}"
    return "?"


def _problems(path: Path) -> list:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    out = []
    where = path.relative_to(SOURCE.parent)
    for node in ast.walk(tree):
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            names = [a.name for a in node.names] + ([node.module] if getattr(
                node, "module", None) else [])
            for n in names:
                if n.split(".")[0] in _PICKLERS:
                    out.append(f"{where}:{node.lineno}: imports {n}")
    for call in _calls(tree):
        name = _dotted(call.func)
        last = name.rsplit(".", 1)[-1]
        line = f"{where}:{call.lineno}"
        if isinstance(call.func, ast.Name) and name in _EVALUATORS:
            out.append(f"{line}: calls {name}()")
        if isinstance(call.func, ast.Attribute) and last in ("eval", "query"):
            out.append(f"{line}: calls {name}() (evaluates an expression string)")
        if last in ("read_pickle", "load_pickle") or name.split(".")[0] in _PICKLERS:
            out.append(f"{line}: calls {name}()")
        if name in ("np.load", "numpy.load"):
            kw = {k.arg: k.value for k in call.keywords}
            flag = kw.get("allow_pickle")
            if not (isinstance(flag, ast.Constant) and flag.value is False):
                out.append(f"{line}: np.load without allow_pickle=False")
        if name in ("yaml.load", "yaml.unsafe_load", "yaml.full_load"):
            out.append(f"{line}: calls {name}()")
    return out


def test_the_scan_sees_the_whole_package():
    names = {p.name for p in MODULES}
    assert {"limits.py", "plan.py", "delimited.py", "binary.py", "cache.py"} <= names
    assert len(MODULES) >= 30


def test_no_code_evaluation_or_unpickling_in_pqcheck():
    problems = [p for m in MODULES for p in _problems(m)]
    assert problems == []


def test_no_allow_pickle_true_anywhere_in_the_text():
    # plain text search, as a reviewer would grep: not even in a comment
    hits = [f"{m.relative_to(SOURCE.parent)}:{k}"
            for m in MODULES
            for k, line in enumerate(m.read_text(encoding="utf-8").splitlines(), start=1)
            if re.search(r"allow_pickle\s*=\s*True|pickle\.loads?\(", line)]
    assert hits == []


@pytest.mark.parametrize("snippet, expected", [
    ("x = eval(text)", "calls eval()"),
    ("import pickle", "imports pickle"),
    ("import numpy as np\na = np.load(p)", "np.load without allow_pickle=False"),
    ("a = np.load(p, allow_pickle=True)", "np.load without allow_pickle=False"),
    ("df.query(expr)", "evaluates an expression string"),
    ("t = pd.read_pickle(p)", "calls pd.read_pickle()"),
])
def test_the_scan_catches_each_pattern(tmp_path, snippet, expected, monkeypatch):
    # the scanner is itself tested, so an empty problem list above means something
    monkeypatch.setattr(sys.modules[__name__], "SOURCE", tmp_path)
    f = tmp_path / "mod.py"
    f.write_text(snippet + "\n")
    assert any(expected in p for p in _problems(f))


def test_limit_formulas_are_parsed_not_run(tmp_path):
    from pqcheck._limit_model import check_formula, evaluate_limit

    marker = tmp_path / "ran"
    for text in (f"__import__('os').system('touch {marker}')", "open('x').read()",
                 "(lambda: 1)()", "[c for c in ()]", "n.__class__", "1 if n else 2"):
        with pytest.raises(ValueError, match="formula"):
            check_formula(text)
    assert not marker.exists()
    # IEC 61000-3-2 Class A, 15 <= n <= 39: 0.15 x 15 / n A (limits/README.md, tag C)
    assert evaluate_limit("0.15 * 15 / n", 15) == pytest.approx(0.15)


def test_npy_with_python_objects_is_refused(tmp_path):
    p = tmp_path / "objects.npy"
    np.save(p, np.array([{"a": 1}], dtype=object), allow_pickle=True)
    res = CliRunner().invoke(main, ["analyze", str(p), "--sample-rate", "1000", "-q",
                                    "--no-cache"])
    assert res.exit_code == 2
    assert re.search(r"objects\.npy: not a readable \.npy array", res.stderr)


# ---- user text in the PDF -------------------------------------------------------------------

MARKUP = {
    "equipment": "<b>&</b>",
    "operator": "A. N. Other <font color=red>&amp;</font>",
    "site": 'Bay 3 <para> "quoted" & \'single\' <br/>',
    "title": "Report <i>unclosed & <u>",
}


def _pdf_text(pdf: Path) -> str:
    from pypdf import PdfReader

    reader = PdfReader(io.BytesIO(pdf.read_bytes()))
    return "\n".join(page.extract_text() or "" for page in reader.pages)


def test_user_text_is_shown_literally_in_the_report(tmp_path):
    # clean capture: 50 Hz, 100 A peak with 2 % fifth, 325 V peak (built from its definition)
    t = np.arange(3840) / 6400.0
    w = 2 * np.pi * 50.0 * t
    i = 100 * (np.sin(w) + 0.02 * np.sin(5 * w))
    v = 325 * np.sin(w)
    cap = tmp_path / "capture.csv"
    cap.write_text("time [s],ia [A],va [V]\n"
                   + "".join(f"{a:.9g},{b:.9g},{c:.9g}\n" for a, b, c in zip(t, i, v)))
    plan = tmp_path / "plan.toml"
    plan.write_text(
        'schema = 1\n'
        f'title = {json.dumps(MARKUP["title"])}\n'
        '[site]\n'
        f'name = {json.dumps(MARKUP["site"])}\n'
        'nominal_voltage_v = 400\nnominal_frequency_hz = 50\nisc_a = 20000\nil_a = 100\n'
        f'[[limits]]\ntable = "{write_without_observation(tmp_path, "ieee519-2022").name}"\n'
        '[[captures]]\nid = "c1"\nfile = "capture.csv"\nload_percent = 50\n'
        'notes = "note <b>bold?</b> & <link href=\'x\'>link</link>"\n'
        '[equipment]\nname = "unit"\n[conditions]\ndate = "2026-01-15"\n'
        '[[conditions.instruments]]\nrole = "digitiser"\nmodel = "d"\naccuracy = "0.5 %"\n')
    out, js = tmp_path / "r.pdf", tmp_path / "r.json"
    res = CliRunner().invoke(main, [
        "report", str(plan), "-o", str(out), "--json", str(js), "-q", "--no-cache",
        "--equipment", MARKUP["equipment"], "--operator", MARKUP["operator"]])
    assert res.exit_code == 0, res.output
    text = _pdf_text(out)
    squeezed = re.sub(r"\s+", " ", text)
    for key in ("equipment", "operator", "site", "title"):
        assert re.sub(r"\s+", " ", MARKUP[key]) in squeezed, (key, MARKUP[key])
    assert "<b>bold?</b> &" in squeezed
    doc = json.loads(js.read_text())
    assert doc["report"]["equipment"] == MARKUP["equipment"]
    assert doc["report"]["operator"] == MARKUP["operator"]
    assert doc["report"]["site"] == MARKUP["site"]
