"""What keeps prespec quick without changing what it says: start-up imports and the libyaml path.

Timings are measured by the scripts in benchmarks/, never asserted here (the machines are shared).
These tests check the two things speed must not cost: ``--help`` and ``--version`` load none of
the heavy libraries, and the C-accelerated loader gives every value, position and message the
main loader gives.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from registry.problems import InvalidSpec
from registry.yamlio import FAST_LOADER, load_bytes, load_bytes_fast

from .conftest import EXAMPLES, ROOT
from .test_hostile import GENERATED, SPECS, _valid

#: Modules that take long to import and that --help and --version never need.
HEAVY = ("scipy.stats", "scipy.optimize", "scipy.linalg", "statsmodels", "matplotlib", "registry.summary", "registry.model",
         "registry.power", "pydantic", "git", "ruamel.yaml", "rich")

_PROBE = """
import json, sys
from registry.cli import main
try:
    main({argv!r})
except SystemExit:
    pass
print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in {roots!r} or m in {heavy!r})))
"""


def _loaded_by(argv: list[str]) -> set[str]:
    roots = sorted({name.split(".")[0] for name in HEAVY})
    code = _PROBE.format(argv=argv, roots=roots, heavy=list(HEAVY))
    result = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr
    loaded = set(json.loads(result.stdout.strip().splitlines()[-1]))
    return {name for name in HEAVY if name in loaded or any(m.startswith(name + ".") for m in loaded)}


@pytest.mark.parametrize("argv", [["--help"], ["--version"], [], ["check", "--help"], ["demo", "--help"]],
                         ids=["help", "version", "nothing", "check-help", "demo-help"])
def test_help_and_version_import_no_heavy_library(argv):
    assert _loaded_by(argv) == set()


def test_checking_t_test_designs_needs_scipy_special_only(tmp_path):
    # a registry of t-test designs is sized with scipy.special; scipy.stats is for simulation and other families
    (tmp_path / "lean.yaml").write_text(_valid("lean", "Lean"), encoding="utf-8")
    loaded = _loaded_by(["check", "--no-history", str(tmp_path / "lean.yaml")])
    assert "scipy.stats" not in loaded and "statsmodels" not in loaded and "matplotlib" not in loaded
    assert "registry.summary" not in loaded
    assert "scipy.optimize" not in loaded  # the minimum detectable effect's root comes from registry.power.roots
    assert "scipy.linalg" not in loaded


def test_checking_a_repeated_measures_design_needs_no_scipy_stats():
    # its F-test power and the critical value at the expected epsilon come from scipy.special's ufuncs
    loaded = _loaded_by(["check", "--no-history", "--no-cache", str(ROOT / "example_registry" / "cast-weekly-weights.yaml")])
    assert "scipy.stats" not in loaded and "statsmodels" not in loaded
    assert "scipy.linalg" not in loaded  # the contrast basis is built with numpy (tests/test_families_e.py)


def test_subcommand_help_still_lists_every_option(run):
    result = run("size", "--help")
    assert result.status == 0
    for option in ("--difference", "--simulate", "--param", "design family, one of"):
        assert option in result.out


def _outcome(loader, raw: bytes, path: str):
    try:
        doc = loader(raw, path)
    except InvalidSpec as error:
        return ("invalid", [(p.field, p.message, p.line, p.column) for p in error.problems], error.source_lines)
    return ("ok", doc.data, doc.value_positions, doc.key_positions, doc.source)


def _cases() -> list[tuple[str, bytes]]:
    cases = [(p.name, p.read_bytes()) for p in sorted(SPECS.iterdir())]
    cases += [(p.name, p.read_bytes()) for p in sorted(EXAMPLES.glob("*.yaml"))]
    cases += [(f"generated-{name}", raw) for name, (raw, *_rest) in sorted(GENERATED.items())
              if len(raw) <= 2_000_000]
    valid = _valid("unusual", "Unusual")
    cases += [
        ("crlf", valid.replace("\n", "\r\n").encode()),
        ("cr", valid.replace("\n", "\r").encode()),
        ("bom", ("\ufeff" + valid).encode()),
        ("wide", valid.replace("Unusual", "剂量 🐟 Μελέτη").encode()),
        ("nel", valid.replace("Unusual", "a\x85b").encode()),
        ("line-separator", valid.replace("Unusual", "a\u2028b").encode()),
        ("folded", (valid + "notes: >\n  folded\n  text\n\n  kept\nrationale: |\n  literal\n   indented\n").encode()),
        ("empty-values", (valid + "question:\nblinding: ''\ncontacts: []\n").encode()),
        ("flow", valid.replace("sample_size:\n  per_group: 17", "sample_size: {per_group: 17}").encode()),
        ("tab-after-value", valid.replace("alpha: 0.05", "alpha: 0.05\t# tab").encode()),
        ("unknown-key", (valid + "colour: blue\n").encode()),
        ("bad-type", valid.replace("per_group: 17", "per_group: [17]").encode()),
        ("directive-after-bom", ("\ufeff%YAML 1.1\n---\n" + valid).encode()),
        ("directive-word-in-text", (valid + "notes: |\n  %YAML is not a directive here\n").encode()),
    ]
    return cases


@pytest.mark.skipif(not FAST_LOADER, reason="PyYAML built without libyaml")
@pytest.mark.parametrize("name, raw", _cases(), ids=[name for name, _ in _cases()])
def test_fast_loader_matches_the_main_loader_exactly(name, raw):
    # same values, positions, messages and source lines, for valid and for hostile input alike
    assert _outcome(load_bytes_fast, raw, name) == _outcome(load_bytes, raw, name)


def test_check_reads_current_files_through_the_fast_loader(monkeypatch, tmp_path):
    import registry.yamlio as yamlio

    calls: list[str] = []
    original = yamlio.load_bytes_fast
    monkeypatch.setattr(yamlio, "load_bytes_fast", lambda raw, path: calls.append(path) or original(raw, path))
    path = tmp_path / "lean.yaml"
    path.write_text(_valid("lean", "Lean"), encoding="utf-8")
    yamlio.load_file(path)
    assert calls == [str(path)]


def test_benchmarks_exist_for_every_target():
    names = {p.name for p in (ROOT / "benchmarks").glob("bench_*.py")}
    assert {"bench_startup.py", "bench_check.py"} <= names
    guide = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    assert all(name in guide for name in names)


def test_a_validation_error_in_a_current_file_keeps_its_position(run, tmp_path):
    text = _valid("placed", "Placed").replace("per_group: 17", "per_group: many")
    path = tmp_path / "placed.yaml"
    path.write_text(text, encoding="utf-8")
    line = next(i for i, row in enumerate(text.splitlines(), 1) if "per_group" in row)
    finding = next(f for f in run("check", "--json", "--no-history", path).json()["specs"][0]["findings"]
                   if f["kind"] == "invalid")
    assert (finding["field"], finding["line"], finding["column"]) == ("sample_size.per_group", line, 14)



# -- the locked fields compared as parsed text before validation ---------------------------------------

from registry.history import Snapshot, _same_locked_input  # noqa: E402

from .history_helpers import Lab, spec_text  # noqa: E402

BEFORE = "2020-01-10T10:00:00+01:00"
AFTER = "2020-04-06T15:30:00+02:00"  # after the start 2020-03-02 of spec_text()


def _drifted(run, lab: Lab) -> list[str]:
    spec = run("check", "--json", lab.registry).json()["specs"][0]
    return sorted(f["field"] for f in spec["findings"] if f["kind"] == "drift")


def test_layout_and_free_field_edits_after_the_start_are_not_drift(run, tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    relaid = spec_text(alpha="0.050", status="collecting", extra="notes: cohort 1\n").replace(
        "  power: 0.8\n", "  power: 0.80   # unchanged\n")
    lab.write("mouse-diet.yaml", relaid)
    lab.commit("collecting", AFTER)
    assert _drifted(run, lab) == []


def test_an_index_in_a_registry_locked_field_locks_the_whole_list(run, tmp_path):
    # the registry locks contacts[0].name; a change to the second contact changes that locked list
    lab = Lab(tmp_path / "lab")
    (lab.registry / ".prespec.yaml").write_text("locked_fields: ['contacts[0].name']\n", encoding="utf-8")
    contacts = "contacts:\n  - name: Lab lead\n  - name: {second}\n"
    lab.write("mouse-diet.yaml", spec_text(extra=contacts.format(second="Postdoc")))
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(extra=contacts.format(second="Technician")))
    lab.commit("new second contact", AFTER)
    assert _drifted(run, lab) == ["contacts[1].name"]


def test_a_free_field_that_makes_a_version_invalid_is_still_compared():
    # same locked text, but one version fails validation: the shortcut does not apply, the full comparison decides
    good, bad = (Snapshot("a", spec_text().encode()), Snapshot("b", spec_text(status="not-a-status").encode()))
    assert _same_locked_input(good, bad, ())
    assert (good.spec is None) != (bad.spec is None)


_ALIAS_LADEN = "a: &a [x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a]\nc: [*b, *b, *b, *b, *b]\n"


@pytest.mark.parametrize("text, expected_id", [
    (spec_text(), "mouse-diet"),  # id and start found: the peek answers
    (_ALIAS_LADEN, None),  # no top-level id anywhere in the text: answered without building 300 values
    ("name: ci\non: [push]\njobs: {test: {id: not-top-level}}\n", None),
    ("- id: a-list-item\n  design: {}\n", None),  # the top level is a list
    ("title: t\ndesign: {}\n---\ntitle: second document\n", None),
    # ids the peek cannot settle, so the text is loaded in full
    ("a: &k id\n*k : keyed-by-alias\ndesign: {}\n", "keyed-by-alias"),
    ("id: no-start\ndesign: {family: two-sample-t}\n", "no-start"),
    ("id: [not, text]\ndesign: {}\n", None),
    ("id: broken\ndesign: {a: [1, 2}\n", None),  # a syntax error: not a readable version
])
def test_a_versions_id_from_the_peek_is_the_id_a_full_load_gives(text, expected_id):
    # Snapshot.id reads only as much of a historical version as it needs; a version with no
    # top-level id is settled by the peek alone, yet every answer equals the full load's
    # (the full load is forced by reading .data first).
    peeked, loaded = Snapshot("a", text.encode()), Snapshot("b", text.encode())
    loaded.data
    assert peeked.id == loaded.id == expected_id
    if expected_id is None and text.startswith(("a: &a", "name: ci", "- id", "title")):
        assert not peeked._parsed, "settled by the peek without a full load"


def test_render_all_in_worker_processes_writes_what_one_process_writes(run, tmp_path, monkeypatch):
    from registry.commands import render as render_command

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1800000000")  # the same render time in both runs
    monkeypatch.setattr(render_command, "POOL_FROM", 10_000)
    assert run("render", "--all", "--no-history", "--registry", EXAMPLES, "--out", tmp_path / "one").status == 0
    monkeypatch.setattr(render_command, "POOL_FROM", 2)
    monkeypatch.setattr(render_command.os, "cpu_count", lambda: 2)
    assert run("render", "--all", "--no-history", "--registry", EXAMPLES, "--out", tmp_path / "pool").status == 0
    one, pool = sorted((tmp_path / "one").iterdir()), sorted((tmp_path / "pool").iterdir())
    assert [p.name for p in one] == [p.name for p in pool] and len(one) > 20
    for a, b in zip(one, pool):
        assert a.read_text(encoding="utf-8") == b.read_text(encoding="utf-8"), a.name


def test_a_command_leaves_the_garbage_collector_as_it_found_it(run):
    # main() collects less often while a command runs; a program calling it keeps its own settings
    import gc

    before = gc.get_threshold()
    gc.set_threshold(123, 4, 5)
    try:
        assert run("size", "two-sample-t", "--d", "0.5").status == 0
        assert gc.get_threshold() == (123, 4, 5)
    finally:
        gc.set_threshold(*before)


def test_check_pauses_the_collector_and_restores_it(run, monkeypatch):
    # a check holds next to no reference cycles, so it runs without collector passes; a program
    # calling main() gets its collector back as it was, enabled or not
    import gc

    import registry.commands.check as check_command

    seen = []
    real = check_command.check
    monkeypatch.setattr(check_command, "check", lambda *a, **k: seen.append(gc.isenabled()) or real(*a, **k))
    was = gc.isenabled()
    try:
        for enabled in (True, False):
            (gc.enable if enabled else gc.disable)()
            assert run("check", "--no-history", EXAMPLES / "fibre-butyrate.yaml").status == 0
            assert gc.isenabled() is enabled
    finally:
        (gc.enable if was else gc.disable)()
    assert seen == [False, False]


@pytest.mark.parametrize("preset", [None, "3"])
def test_the_cli_runs_openblas_on_one_thread_unless_told_otherwise(preset):
    # prespec's parallel work is processes, one per core: BLAS threads beside them only compete
    env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
    if preset is not None:
        env["OPENBLAS_NUM_THREADS"] = preset
    probe = ("import os, registry.__main__ as m, registry.cli as c\n"
             "c.main = lambda: print(os.environ.get('OPENBLAS_NUM_THREADS')) or 0\n"
             "m.entry()\n")
    done = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, env=env, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == (preset or "1")
