"""The warm check cache: a cached run says what a cold run says, and anything a result depends on
recomputes it (file bytes, commits, tags, settings, pilot data); damaged entries are rebuilt,
``--no-cache`` ignores the cache, concurrent runs agree, and nothing is written into the working tree."""

from __future__ import annotations

import hashlib
import io
import json
import os
import random
import subprocess
import sys
from pathlib import Path

import pytest
from rich.table import Table
from rich.text import Text

from registry.checkcache import FOLDER, blob_id
from registry.report import _COLUMNS, _Console, _print_plain_table

from .conftest import ROOT
from .history_helpers import Lab, spec_text

CACHE = Path(".git") / "prespec" / FOLDER


@pytest.fixture
def lab(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text(start="2020-03-02"))
    lab.write("rat-diet.yaml", spec_text("rat-diet", start="2020-03-02", per_group="60"))  # oversized
    lab.write("broken.yaml", "id: broken\ndesign: [unclosed\n")
    lab.commit("Plan the diet studies", "2020-02-01T10:00:00+00:00")
    lab.write("mouse-diet.yaml", spec_text(start="2020-03-02", sd="6.0", per_group="40"))
    lab.commit("Raise the SD after the start", "2020-04-01T10:00:00+00:00")  # drift
    return lab


def _entries(root: Path) -> list[Path]:
    folder = root / CACHE
    return sorted(folder.glob("*.json")) if folder.is_dir() else []


def _tree(root: Path) -> dict[str, bytes]:
    """Every file outside .git, with its bytes."""
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in root.rglob("*")
            if p.is_file() and ".git" not in p.relative_to(root).parts}


def test_blob_id_is_gits_object_id(tmp_path):
    path = tmp_path / "x.yaml"
    path.write_bytes(b"id: x\n\xc3\xa9\n")
    # git hash-object, the reference implementation of the object id
    expected = subprocess.run(["git", "hash-object", str(path)], capture_output=True, text=True, check=True).stdout
    assert blob_id(path.read_bytes()) == expected.strip()


def test_the_code_fingerprint_follows_every_file_of_the_package_but_its_bytecode(tmp_path):
    # a development install keeps its version number while its code changes: every entry made by
    # other code is stale
    from registry.checkcache import code_fingerprint

    package = tmp_path / "package"
    (package / "power").mkdir(parents=True)
    (package / "power" / "solve.py").write_text("N = 1\n", encoding="utf-8")
    fingerprint = code_fingerprint.__wrapped__
    first = fingerprint(package)
    assert fingerprint(package) == first and len(first) == 64
    (package / "__pycache__").mkdir()
    (package / "__pycache__" / "solve.cpython-311.pyc").write_bytes(b"\0" * 16)
    assert fingerprint(package) == first  # bytecode is written by running the code, not a change of it
    (package / "power" / "solve.py").write_text("N = 22\n", encoding="utf-8")
    changed = fingerprint(package)
    assert changed != first
    (package / "power" / "extra.py").write_text("", encoding="utf-8")
    assert fingerprint(package) not in (first, changed)
    assert code_fingerprint() == code_fingerprint()  # the installed package's, computed once per run


def test_entries_made_by_other_code_are_not_used(run, lab, monkeypatch):
    import registry.checkcache as checkcache

    run("check", lab.registry, "--json")
    from registry.diskcache import seal

    for path in _entries(lab.root):  # as before: a run showing these messages read the cache
        entry = json.loads(path.read_text(encoding="utf-8").replace("more than the", "MORE THAN THE"))
        entry["seal"] = seal(entry["key"], entry["value"])
        path.write_text(json.dumps(entry), encoding="utf-8")
    assert "MORE THAN THE" in run("check", lab.registry, "--json").out
    monkeypatch.setattr(checkcache, "code_fingerprint", lambda: "0" * 64)  # the package changed
    assert "MORE THAN THE" not in run("check", lab.registry, "--json").out


def test_a_cached_run_prints_what_a_cold_run_prints(run, lab):
    cold_json = run("check", lab.registry, "--json", "--no-cache")
    cold_text = run("check", lab.registry, "--no-cache")
    assert not _entries(lab.root)  # --no-cache keeps nothing
    first = run("check", lab.registry, "--json")
    assert _entries(lab.root)
    warm_json = run("check", lab.registry, "--json")
    warm_text = run("check", lab.registry)
    assert cold_json.status == first.status == warm_json.status == warm_text.status == cold_text.status == 1
    assert cold_json.out == first.out == warm_json.out
    assert cold_text.out == warm_text.out and cold_text.err == warm_text.err
    kinds = {f["kind"] for spec in warm_json.json()["specs"] for f in spec["findings"]}
    assert {"drift", "oversized", "invalid"} <= kinds


def test_the_cached_results_are_the_ones_used_and_no_cache_skips_them(run, lab):
    run("check", lab.registry, "--json")
    # Rewrite every stored message: a run that shows them read the cache; --no-cache must not.
    from registry.diskcache import seal

    for path in _entries(lab.root):  # altered and sealed again with this user's key, as prespec would
        entry = json.loads(path.read_text(encoding="utf-8").replace("more than the", "MORE THAN THE"))
        entry["seal"] = seal(entry["key"], entry["value"])
        path.write_text(json.dumps(entry), encoding="utf-8")
    assert "MORE THAN THE" in run("check", lab.registry, "--json").out
    fresh = run("check", lab.registry, "--json", "--no-cache")
    assert "MORE THAN THE" not in fresh.out and "more than the" in fresh.out


def test_editing_a_spec_recomputes_it(run, lab):
    run("check", lab.registry, "--json")
    lab.write("rat-diet.yaml", spec_text("rat-diet", start="2020-03-02", per_group="29"))
    warm = run("check", lab.registry, "--json")
    assert warm.out == run("check", lab.registry, "--json", "--no-cache").out
    rat = next(s for s in warm.json()["specs"] if s["id"] == "rat-diet")
    assert rat["planned_per_group"] == 29
    assert "oversized" not in {f["kind"] for f in rat["findings"]}


def test_a_new_commit_recomputes_the_history(run, lab):
    before = run("check", lab.registry, "--json").json()
    rat = next(s for s in before["specs"] if s["id"] == "rat-diet")
    assert rat["history"]["verdict"] == "clean"
    lab.write("rat-diet.yaml", spec_text("rat-diet", start="2020-03-02", per_group="60", sd="7.0"))
    lab.commit("Change the rat SD after the start", "2020-05-01T10:00:00+00:00")
    after = run("check", lab.registry, "--json")
    assert after.out == run("check", lab.registry, "--json", "--no-cache").out
    rat = next(s for s in after.json()["specs"] if s["id"] == "rat-diet")
    assert rat["history"]["verdict"] == "drift"
    assert any(f["kind"] == "drift" for f in rat["findings"])


def test_a_new_tag_recomputes_the_history(run, lab):
    assert "registered-missing" not in run("check", lab.registry, "--json").out
    subprocess.run(["git", "-C", str(lab.root), "tag", "prespec/ghost-study/v1"], check=True)
    warm = run("check", lab.registry, "--json")
    assert warm.out == run("check", lab.registry, "--json", "--no-cache").out
    assert "registered-missing" in warm.out


def test_an_uncommitted_edit_and_a_new_day_recompute_the_history(run, lab):
    from datetime import date

    from registry.audit import add_history
    from registry.checkcache import CheckCache
    from registry.checks import check_registry
    from registry.discovery import discover

    cache = CheckCache()
    files, reports, _ = check_registry(discover([str(lab.registry)]), cache=cache)
    add_history(reports, files, [str(lab.registry)], today=date(2020, 3, 1), cache=cache)
    lab.write("rat-diet.yaml", spec_text("rat-diet", start="2020-03-02", per_group="60", sd="7.0"))
    for day, expected in ((date(2020, 3, 1), False), (date(2021, 1, 1), True)):
        cache = CheckCache()
        files, reports, _ = check_registry(discover([str(lab.registry)]), cache=cache)
        add_history(reports, files, [str(lab.registry)], today=day, cache=cache)
        rat = next(r for r in reports if r.id == "rat-diet")
        # after the start, an uncommitted change of a locked field is an error
        assert any(f.kind == "uncommitted" and f.severity == "error" for f in rat.findings) is expected, day


def test_a_changed_setting_or_pilot_file_recomputes(run, tmp_path):
    folder = tmp_path / "reg"
    (folder / "data").mkdir(parents=True)
    pilot = folder / "data" / "pilot.csv"
    pilot.write_text("id,weight\n" + "".join(f"a{i},{4 + (i % 5) * 0.5}\n" for i in range(12)), encoding="utf-8")
    digest = hashlib.sha256(pilot.read_bytes()).hexdigest()
    spec = spec_text("pilot-mice", per_group="60").replace("  attrition: 0.1\n", f"  attrition: 0.1\n  pilot:\n    file: data/pilot.csv\n"
                        f"    column: weight\n    sha256: \"{digest}\"\n")
    (folder / "pilot-mice.yaml").write_text(spec, encoding="utf-8")
    first = run("check", folder, "--json")
    assert "oversized" in first.out and "pilot-changed" not in first.out
    assert run("check", folder, "--json", "--oversize-margin", "2").out == \
        run("check", folder, "--json", "--oversize-margin", "2", "--no-cache").out
    assert "oversized" not in run("check", folder, "--json", "--oversize-margin", "2").out
    pilot.write_text(pilot.read_text() + "a99,9.0\n", encoding="utf-8")
    assert "pilot-changed" in run("check", folder, "--json").out
    pilot.unlink()
    assert "pilot-missing" in run("check", folder, "--json").out
    assert run("check", folder, "--json").out == run("check", folder, "--json", "--no-cache").out


def test_a_damaged_entry_is_ignored_and_rebuilt(run, lab):
    cold = run("check", lab.registry, "--json", "--no-cache").out
    run("check", lab.registry, "--json")
    entries = _entries(lab.root)
    damage = [b"", b"{not json", b'{"key": "other", "value": {}}', b"\xff\xfe\x00", b'{"key": 1}']
    for index, path in enumerate(entries):
        key = path.stem
        good = json.loads(path.read_text(encoding="utf-8"))
        if index % 2:  # right key, value of the wrong shape
            path.write_text(json.dumps({"key": key, "value": {"row": "[]", "findings": 3, **{
                k: v for k, v in good["value"].items() if k not in ("row", "findings", "members")}}}),
                encoding="utf-8")
        else:
            path.write_bytes(damage[index % len(damage)])
    assert run("check", lab.registry, "--json").out == cold
    for path in _entries(lab.root):  # rewritten whole
        assert json.loads(path.read_text(encoding="utf-8"))["key"] == path.stem
    assert run("check", lab.registry, "--json").out == cold


def test_the_cache_never_writes_into_the_working_tree(run, lab, tmp_path):
    before = _tree(lab.root)
    run("check", lab.registry)
    run("check", lab.registry, "--json")
    assert _tree(lab.root) == before
    status = subprocess.run(["git", "-C", str(lab.root), "status", "--porcelain", "--ignored"], capture_output=True,
                            text=True, check=True).stdout
    assert status == ""
    outside = tmp_path / "plain"  # not in git: the user cache folder (XDG_CACHE_HOME, set per test)
    outside.mkdir()
    (outside / "mouse-diet.yaml").write_text(spec_text(), encoding="utf-8")
    files = _tree(outside)
    cold = run("check", outside, "--json", "--no-cache").out
    assert run("check", outside, "--json").out == cold == run("check", outside, "--json").out
    assert _tree(outside) == files
    assert list((Path(os.environ["XDG_CACHE_HOME"]) / "prespec" / FOLDER).glob("*.json"))


def test_concurrent_runs_agree_and_leave_whole_entries(lab):
    env = {**os.environ, "NO_COLOR": "1", "PYTHONPATH": str(ROOT)}
    args = [sys.executable, "-m", "registry", "check", "--json", str(lab.registry)]
    cold = subprocess.run(args + ["--no-cache"], capture_output=True, env=env, cwd=ROOT).stdout
    for _ in range(2):  # the first round races to write, the second reads what the first wrote
        runs = [subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, cwd=ROOT)
                for _ in range(4)]
        outs = [p.communicate() for p in runs]
        assert [p.returncode for p in runs] == [1] * 4, [err[-400:] for _, err in outs]
        assert all(out == cold for out, _ in outs)
    folder = lab.root / CACHE
    assert not [p for p in folder.iterdir() if p.suffix != ".json"]  # no temporary file left behind
    for path in folder.iterdir():
        assert json.loads(path.read_text(encoding="utf-8"))["key"] == path.stem


def _rich_table(rows) -> str:
    buffer = io.StringIO()
    out = _Console(file=buffer, color_system=None, no_color=True, highlight=False, emoji=False, markup=False,
                   width=120)
    table = Table(title=None, show_edge=False, header_style="bold", pad_edge=False)
    for name, justify in _COLUMNS:
        table.add_column(name, justify=justify)
    for *cells, verdict in rows:
        table.add_row(Text(cells[0]), *cells[1:], Text(verdict))
    out.print(table)
    return buffer.getvalue()


@pytest.mark.parametrize("seed", range(40))
def test_the_plain_table_is_the_one_rich_draws(seed):
    # rich's own Table is the reference; the plain writer must match it byte for byte where it applies
    rng = random.Random(seed)
    words = ["ok", "oversized", "underpowered", "drift", "-", "two-sample-t", "a", "x" * rng.randint(1, 30),
             "1,234", "0.800", "0.8", "mouse diet", "a  b"] + (["mouse diet  ", " lead"] if seed % 4 == 0 else [])
    rows = [tuple(rng.choice(words) for _ in _COLUMNS) for _ in range(rng.randint(0, 6))]
    buffer = io.StringIO()
    out = _Console(file=buffer, color_system=None, no_color=True, highlight=False, emoji=False, markup=False,
                   width=120)
    if _print_plain_table(out, rows):
        assert buffer.getvalue() == _rich_table(rows)
        assert seed % 4 or not any(cell != cell.strip() for row in rows for cell in row)
    else:
        too_wide = sum(max([len(n)] + [len(r[i]) for r in rows]) for i, (n, _) in enumerate(_COLUMNS)) + 18 > 120
        assert too_wide or any(cell != cell.strip() for row in rows for cell in row)


def test_a_fifo_or_link_in_the_cache_folder_is_passed_over(run, lab, tmp_path):
    cold = run("check", lab.registry, "--json", "--no-cache").out
    run("check", lab.registry, "--json")
    entries = _entries(lab.root)
    os.unlink(entries[0])
    os.mkfifo(entries[0])  # never opened for a blocking read
    elsewhere = tmp_path / "elsewhere.json"
    elsewhere.write_text("{}", encoding="utf-8")
    os.unlink(entries[1])
    os.symlink(elsewhere, entries[1])  # never written through
    assert run("check", lab.registry, "--json").out == cold
    assert elsewhere.read_text(encoding="utf-8") == "{}"


def test_entries_planted_in_a_repository_are_not_trusted(run, lab):
    # a repository someone else made may carry its own .git/prespec cache, made to hide the drift;
    # without this user's key its entries cannot be sealed, so they are computed afresh
    cold = run("check", lab.registry, "--json", "--no-cache").out
    assert '"drift"' in cold
    run("check", lab.registry, "--json")
    for path in _entries(lab.root):
        entry = json.loads(path.read_text(encoding="utf-8").replace('"drift"', '"amended"'))
        entry["seal"] = hashlib.sha256(b"someone else's key").hexdigest()
        path.write_text(json.dumps(entry), encoding="utf-8")
    assert run("check", lab.registry, "--json").out == cold
    for path in _entries(lab.root):  # and unsealed entries are no better
        entry = json.loads(path.read_text(encoding="utf-8").replace('"drift"', '"amended"'))
        entry.pop("seal")
        path.write_text(json.dumps(entry), encoding="utf-8")
    assert run("check", lab.registry, "--json").out == cold


def test_the_sealing_key_is_the_users_own(tmp_path, monkeypatch):
    from registry import diskcache

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    diskcache._secret.cache_clear()
    try:
        assert diskcache.seal("k", {"a": 1}) is not None
        key = tmp_path / "cache" / "prespec" / "entry-key"
        assert len(key.read_bytes()) == 32
        if os.name == "posix":
            assert key.stat().st_mode & 0o077 == 0
            diskcache._secret.cache_clear()
            key.chmod(0o644)  # a key others can read seals nothing
            assert diskcache.seal("k", {"a": 1}) is None
    finally:
        diskcache._secret.cache_clear()
