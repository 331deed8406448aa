"""Hostile and malformed input: every bad spec gets a precise error, nothing is lost, nothing runs.

The committed corpus lives in tests/hostile/specs/ with its expectations in
tests/hostile/expected.yaml (file -> field, line, column and a message fragment).
Cases that would be large or cannot be committed (alias bombs, deep nesting, huge,
binary and non-UTF-8 files, symbolic links, FIFOs, unreadable files) are made at run
time by the tables below. The expectations are facts of YAML 1.2 and of the spec model
(docs/errors.md lists them); line and column are 1-based as editors show them.
"""

from __future__ import annotations

import hashlib
import os
import resource
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from registry.checks import check_file
from registry.discovery import SpecFile, discover
from registry.power.catalog import family_names
from registry.yamlio import MAX_DEPTH, MAX_FILE_BYTES, MAX_NODES, load_file

from .conftest import EXAMPLES, ROOT

HOSTILE = ROOT / "tests" / "hostile"
SPECS = HOSTILE / "specs"
MANIFEST = load_file(HOSTILE / "expected.yaml").data
#: What the committed payloads would create if any tag were ever constructed.
MARKER = "prespec-hostile-ran"

VALID = """id: {id}
title: {title}
status: draft
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  alpha: 0.05
  power: 0.8
  effect:
    difference: 1.0
    sd: 1.0
sample_size:
  per_group: 17
"""
# d = 1 two-sided, alpha 0.05, power 0.8: 17 per group (noncentral t; statsmodels TTestIndPower gives 16.71).
VALID_NEEDED = 17


def _spec(path: Path) -> SpecFile:
    return SpecFile(path, path.name, path.parent)


def _errors(report):
    return [f for f in report.findings if f.severity == "error"]


def _matches(finding, want: dict) -> bool:
    if finding.kind != "invalid":
        return False
    if want.get("field") is not None and finding.field != want["field"]:
        return False
    if "line" in want and want["line"] is not None and (finding.line, finding.column) != (want["line"], want["column"]):
        return False
    if want.get("line", "absent") is None and finding.line is not None:
        return False
    return want["message"] in finding.message


def _assert_reported(report, want: dict) -> None:
    errors = _errors(report)
    assert errors, f"{report.path}: no error finding"
    assert any(_matches(f, want) for f in errors), (
        f"{report.path}: expected {want}, got "
        + "; ".join(f"{f.field!r} {f.line}:{f.column} {f.message!r}" for f in errors))
    if want.get("lists_families"):
        message = next(f.message for f in errors if _matches(f, want))
        assert all(name in message for name in family_names())


def test_corpus_is_large_and_every_file_has_an_expectation():
    files = sorted(p.name for p in SPECS.iterdir())
    assert len(files) >= 60
    assert sorted(MANIFEST) == files


@pytest.mark.parametrize("name", sorted(MANIFEST), ids=str)
def test_committed_case_gets_its_error(name):
    report = check_file(_spec(SPECS / name))
    _assert_reported(report, MANIFEST[name])
    assert report.spec is None
    assert not any("Traceback" in f.message for f in report.findings)


def test_committed_case_location_points_at_the_named_line():
    # The caret is only useful if line and column fall inside the file's text.
    for name, want in MANIFEST.items():
        if want.get("line"):
            lines = (SPECS / name).read_bytes().decode("utf-8").splitlines()
            assert 1 <= want["line"] <= max(len(lines), 1), name
            assert 1 <= want["column"] <= len(lines[want["line"] - 1]) + 1, name


# --- cases made at run time ------------------------------------------------------------------------------

def _laughs(levels: int, width: int) -> bytes:
    lines = ['l0: &l0 "lol"']
    for i in range(1, levels + 1):
        lines.append(f"l{i}: &l{i} [" + ", ".join([f"*l{i - 1}"] * width) + "]")
    return ("\n".join(lines) + "\n").encode()


def _laughs_mapping(levels: int, width: int) -> bytes:
    lines = ["m0: &m0 {a: 1}"]
    for i in range(1, levels + 1):
        lines.append(f"m{i}: &m{i} {{" + ", ".join(f"k{j}: *m{i - 1}" for j in range(width)) + "}")
    return ("\n".join(lines) + "\n").encode()


def _valid(spec_id: str = "generated", title: str = "Generated case") -> str:
    return VALID.format(id=spec_id, title=title)


def _cut_after_half_beta(spec_id: str) -> bytes:
    """A spec titled 'αβ' cut after the first of the two UTF-8 bytes of β (0xce 0xb2)."""
    raw = _valid(spec_id, "\u03b1\u03b2").encode()
    return raw[: raw.index("\u03b2".encode()) + 1]


#: name -> (bytes, field or None, line, column, message fragment); line None: no position asserted.
GENERATED: dict[str, tuple[bytes, str | None, int | None, int | None, str]] = {
    "alias-bomb-sequences.yaml": (_laughs(10, 10), None, None, None,
                                  f"more than {MAX_NODES:,} values once its aliases (*name) are expanded"),
    "alias-bomb-mappings.yaml": (_laughs_mapping(12, 8), None, None, None,
                                 f"more than {MAX_NODES:,} values once its aliases"),
    "alias-fan-out.yaml": (b"s: &s '" + b"x" * 50_000 + b"'\nexclusion_criteria: [" + b", ".join([b"*s"] * 30_000)
                           + b"]\n", None, None, None, f"more than {MAX_NODES:,} values"),
    "deep-flow-lists.yaml": (b"notes: " + b"[" * 10_000 + b"]" * 10_000 + b"\n", "", 1, 8 + MAX_DEPTH,
                             f"nested more than {MAX_DEPTH} levels deep"),
    "deep-flow-mappings.yaml": (b"notes: " + b"{k: " * 5_000 + b"1" + b"}" * 5_000 + b"\n", "", 1, None,
                                f"nested more than {MAX_DEPTH} levels deep"),
    "deep-block-mappings.yaml": ("".join(" " * i + f"k{i}:\n" for i in range(1_200)).encode(), "", MAX_DEPTH + 1, None,
                                 f"nested more than {MAX_DEPTH} levels deep"),
    "deep-block-lists.yaml": (b"notes:\n" + b"- " * 5_000 + b"x\n", "", 2, None,
                              f"nested more than {MAX_DEPTH} levels deep"),
    "alias-deep.yaml": (("a0: &a0 [1]\n" + "".join(f"a{i}: &a{i} [*a{i - 1}]\n" for i in range(1, 60))).encode(),
                        None, None, None, f"nested more than {MAX_DEPTH} levels deep (counting aliases)"),
    "many-values.yaml": (b"exclusion_criteria: [" + b",".join([b"1"] * 30_000) + b"]\n", "", 1, None,
                         f"the file holds more than {MAX_NODES:,} values"),
    "huge.yaml": (b"notes: '" + b"x" * (MAX_FILE_BYTES + 10) + b"'\n", "", None, None,
                  f"a spec is a page of text, at most {MAX_FILE_BYTES:,} bytes"),
    "long-title.yaml": (_valid("long-title", "x" * 900_000).encode(), "title", 2, 8,
                        "title is 900,000 characters long; at most 500 are allowed"),
    "long-key.yaml": (_valid("long-key").encode() + b"k" * 5_000 + b": 1\n", "", 15, 1,
                      "has no ':' after it (or is longer than 1024 characters)"),
    "long-unknown-key.yaml": (_valid("long-unknown-key").encode() + b"k" * 1_000 + b": 1\n", "k" * 1_000, 15, 1,
                              "unknown key 'kkkkkkkk"),
    "long-bad-date.yaml": (_valid("long-bad-date").replace("2027-03-01", "2027-" + "9" * 15_000).encode(),
                           "data_collection.start", 5, 10, "must be a date written YYYY-MM-DD"),
    "binary-random.yaml": (bytes((i * 7919) % 256 for i in range(4096)), "", 1, 1,
                           "this is a binary file, not a YAML text spec"),
    "binary-png.yaml": (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR" + b"\x00" * 64, "", 3, 1, "binary file"),
    "binary-nul-in-text.yaml": (_valid("binary-nul-in-text").encode().replace(b"draft", b"dr\x00aft"), "", 3, 11,
                                "contains zero bytes"),
    "utf16-with-bom.yaml": (_valid("utf16-with-bom").encode("utf-16"), "", None, None,
                            "the file is UTF-16 encoded (it starts with a UTF-16 byte-order mark); save it as UTF-8"),
    "utf16-big-endian.yaml": (b"\xfe\xff" + _valid("utf16-big-endian").encode("utf-16-be"), "", None, None,
                              "the file is UTF-16 encoded"),
    "utf16-without-bom.yaml": (_valid("utf16-without-bom").encode("utf-16-le"), "", None, None,
                               "looks like UTF-16 or UTF-32 text without a byte-order mark"),
    "utf32-with-bom.yaml": (_valid("utf32-with-bom").encode("utf-32"), "", None, None, "the file is UTF-32 encoded"),
    "latin1.yaml": (_valid("latin1", "Caf\xe9 study").encode("latin-1"), "", 2, 11,
                    "not valid UTF-8: byte 0xe9 cannot be read (if the file was saved as Latin-1 or Windows-1252, this byte is 'é')"),
    "windows-1252-quotes.yaml": (_valid("windows-1252-quotes", "\u201cquoted\u201d").encode("cp1252"), "", 2, 8,
                                 "byte 0x93 cannot be read (if the file was saved as Latin-1 or Windows-1252, this byte is '\u201c')"),
    "truncated-utf8.yaml": (_cut_after_half_beta("truncated-utf8") + b"\n", "", 2, 9,
                            "not valid UTF-8: byte 0xce cannot be read"),
    "cut-mid-character.yaml": (_cut_after_half_beta("cut-mid-character"), "", 2, 9,
                               "it ends in the middle of a character (byte 0xce)"),
    "control-escape.yaml": (_valid("control-escape").encode().replace(b"draft", b"dr\x1b[2Jaft"), "", 3, 11,
                            "the control character U+001B"),
}


@pytest.mark.parametrize("name", sorted(GENERATED), ids=str)
def test_generated_case_gets_its_error(name, tmp_path):
    raw, field, line, column, message = GENERATED[name]
    path = tmp_path / name
    path.write_bytes(raw)
    report = check_file(_spec(path))
    want = {"field": field, "message": message}
    if line is not None:
        want["line"], want["column"] = line, column
    if column is None and line is not None:
        want.pop("line"), want.pop("column")
        assert any(f.line == line for f in _errors(report)), [(f.line, f.message) for f in _errors(report)]
    _assert_reported(report, want)
    assert report.spec is None


@pytest.mark.parametrize("text, title", [
    ("\ufeff" + _valid("bom", "With a byte-order mark"), "With a byte-order mark"),
    (_valid("crlf", "Windows line endings").replace("\n", "\r\n"), "Windows line endings"),
    (_valid("old-mac", "Carriage returns only").replace("\n", "\r"), "Carriage returns only"),
    (_valid("greek", "Μελέτη δόσης και απόκρισης"), "Μελέτη δόσης και απόκρισης"),
    (_valid("chinese", "剂量反应研究"), "剂量反应研究"),
    (_valid("arabic", "دراسة العلاقة بين الجرعة والاستجابة"), "دراسة العلاقة بين الجرعة والاستجابة"),
    (_valid("emoji", "Zebrafish 🐟 larvae"), "Zebrafish 🐟 larvae"),
    ("---\n" + _valid("markers", "Document markers") + "...\n", "Document markers"),
    ("%YAML 1.2\n---\n" + _valid("directive", "YAML 1.2 directive"), "YAML 1.2 directive"),
    ("# comment\n" + _valid("comments", "Comments # not one").replace("Comments # not one", "'Comments # not one'  # one"),
     "Comments # not one"),
    (_valid("hex", "Hexadecimal n").replace("per_group: 17", "per_group: 0x11"), "Hexadecimal n"),
    (_valid("octal", "Octal n").replace("per_group: 17", "per_group: 0o21"), "Octal n"),
], ids=["bom", "crlf", "cr", "greek", "chinese", "arabic", "emoji", "markers", "directive", "comments", "hex", "octal"])
def test_valid_but_unusual_input_is_accepted(text, title, tmp_path):
    spec_id = text.split("id: ", 1)[1].split()[0]
    path = tmp_path / f"{spec_id}.yaml"
    path.write_bytes(text.encode("utf-8"))
    report = check_file(_spec(path))
    assert not _errors(report), [f.message for f in report.findings]
    assert report.spec is not None and report.spec.title == title
    assert report.required_per_group == VALID_NEEDED


def test_crlf_positions_are_the_same_as_lf(tmp_path):
    text = _valid("crlf-bad").replace("alpha: 0.05", "alpha: 5")
    (tmp_path / "lf.yaml").write_bytes(text.encode())
    (tmp_path / "crlf.yaml").write_bytes(text.replace("\n", "\r\n").encode())
    lf, crlf = (check_file(_spec(tmp_path / n)) for n in ("lf.yaml", "crlf.yaml"))
    assert [(f.field, f.line, f.column) for f in _errors(lf)] == [(f.field, f.line, f.column) for f in _errors(crlf)]
    assert (_errors(lf)[0].line, _errors(lf)[0].column) == (8, 10)


# --- nothing runs -------------------------------------------------------------------------------------------

def test_python_tags_construct_nothing(run, tmp_path, monkeypatch):
    # Each payload would create MARKER in the current folder if a tag were ever constructed.
    payloads = [p for p in SPECS.iterdir() if MARKER in p.read_text(encoding="utf-8")]
    assert len(payloads) >= 5
    monkeypatch.chdir(tmp_path)
    for path in payloads:
        shutil.copy(path, tmp_path / path.name)
    result = run("check", "--", *[p.name for p in payloads])
    assert result.status == 1
    assert not (tmp_path / MARKER).exists()
    assert result.out.count("is not allowed") >= len(payloads)


def test_python_tags_construct_nothing_in_a_fresh_interpreter(tmp_path):
    payloads = [p for p in SPECS.iterdir() if MARKER in p.read_text(encoding="utf-8")]
    for path in payloads:
        shutil.copy(path, tmp_path / path.name)
    result = _check_subprocess(tmp_path, ["."], timeout=120)
    assert result.returncode == 1, result.stderr
    assert not (tmp_path / MARKER).exists()
    assert "Traceback" not in result.stdout + result.stderr


# --- the whole hostile registry in one run ------------------------------------------------------------------

def _limits() -> None:
    one_gib = 1 << 30
    resource.setrlimit(resource.RLIMIT_AS, (one_gib, one_gib))


def _check_subprocess(cwd: Path, args: list[str], timeout: float) -> subprocess.CompletedProcess:
    env = {"PYTHONPATH": str(ROOT), "NO_COLOR": "1", "PATH": os.environ.get("PATH", "/usr/bin:/bin"),
           "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "HOME": str(cwd)}
    return subprocess.run([sys.executable, "-m", "registry", "check", *args], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=timeout, preexec_fn=_limits)


def _hashes(folder: Path) -> dict[str, str]:
    out = {}
    for path in sorted(folder.rglob("*")):
        if path.is_file() and not path.is_symlink():
            out[str(path.relative_to(folder))] = hashlib.sha256(path.read_bytes()).hexdigest()
    return out


@pytest.fixture
def hostile_registry(tmp_path):
    """Every committed and generated hostile file next to the valid example specs."""
    registry = tmp_path / "registry"
    (registry / "specs").mkdir(parents=True)
    for path in SPECS.iterdir():
        shutil.copy(path, registry / "specs" / path.name)
    for name, (raw, *_rest) in GENERATED.items():
        (registry / "generated").mkdir(exist_ok=True)
        (registry / "generated" / name).write_bytes(raw)
    for path in EXAMPLES.glob("*.yaml"):
        shutil.copy(path, registry / path.name)
    outside = tmp_path / "outside.yaml"
    outside.write_text(_valid("outside"), encoding="utf-8")
    (registry / "links").mkdir()
    (registry / "links" / "outside-link.yaml").symlink_to(outside)
    (registry / "links" / "outside-folder").symlink_to(tmp_path, target_is_directory=True)
    (registry / "links" / "loop.yaml").symlink_to(registry / "links" / "loop.yaml")
    (registry / "links" / "broken.yaml").symlink_to(registry / "links" / "missing-target.yaml")
    os.mkfifo(registry / "pipe.yaml")
    return registry


def test_hostile_registry_reports_every_file_and_sizes_the_valid_ones(hostile_registry):
    before = _hashes(hostile_registry.parent)
    result = _check_subprocess(hostile_registry, ["--json", "."], timeout=300)
    after = _hashes(hostile_registry.parent)
    assert result.returncode == 1, result.stderr[-3000:]
    assert "Traceback" not in result.stdout + result.stderr
    assert before == after, "check modified a file"
    payload = __import__("json").loads(result.stdout)
    by_path = {Path(spec["path"]).as_posix(): spec for spec in payload["specs"]}
    hostile = [f"specs/{n}" for n in MANIFEST] + [f"generated/{n}" for n in GENERATED] + [
        "links/outside-link.yaml", "links/outside-folder", "links/loop.yaml", "links/broken.yaml", "pipe.yaml"]
    for path in hostile:
        assert path in by_path, f"{path} was not reported"
        assert by_path[path]["verdict"] == "invalid", (path, by_path[path]["findings"])
        assert by_path[path]["findings"][0]["message"]
    for example in EXAMPLES.glob("*.yaml"):
        spec = by_path[example.name]
        assert spec["verdict"] != "invalid", spec["findings"]
        assert spec["required_per_group"] and spec["planned_per_group"]
    assert len(by_path) == len(hostile) + len(list(EXAMPLES.glob("*.yaml")))


def test_hostile_registry_text_output_names_files_and_lines(hostile_registry, run, monkeypatch):
    monkeypatch.chdir(hostile_registry)
    result = run("check", ".")
    assert result.status == 1
    assert "Traceback" not in result.out + result.err
    assert "specs/alpha-percent.yaml:8:10" in result.out
    assert "specs/-rf.yaml:8:10" in result.out
    assert "links/outside-link.yaml" in result.out and "outside the registry" in result.out
    assert "fibre-butyrate" in result.out and "two-sample-t" in result.out


# --- file system corner cases --------------------------------------------------------------------------------

def test_dash_named_file_on_the_command_line(run, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    shutil.copy(SPECS / "-rf.yaml", tmp_path / "-rf.yaml")
    as_option = run("check", "-rf.yaml")
    assert as_option.status == 2 and "put '--' before the file names" in as_option.err
    after_dashes = run("check", "--", "-rf.yaml")
    assert after_dashes.status == 1
    assert "-rf.yaml:8:10" in after_dashes.out and "did you mean 0.05?" in after_dashes.out
    dotted = run("check", "./-rf.yaml")
    assert dotted.status == 1 and "did you mean 0.05?" in dotted.out
    assert (tmp_path / "-rf.yaml").read_bytes() == (SPECS / "-rf.yaml").read_bytes()


def test_dash_named_file_inside_a_folder(run, tmp_path):
    shutil.copy(SPECS / "-rf.yaml", tmp_path / "-rf.yaml")
    (tmp_path / "--help.yaml").write_text(_valid("help"), encoding="utf-8")
    result = run("check", str(tmp_path))
    assert result.status == 1
    assert "-rf.yaml:8:10" in result.out
    assert "--help.yaml" in result.out  # named in the id-mismatch warning: it was read as a file


def test_symlinks_leaving_the_registry_are_refused(tmp_path):
    registry, elsewhere = tmp_path / "registry", tmp_path / "elsewhere"
    registry.mkdir(), elsewhere.mkdir()
    (elsewhere / "secret.yaml").write_text(_valid("secret"), encoding="utf-8")
    (registry / "inside.yaml").write_text(_valid("inside"), encoding="utf-8")
    (registry / "secret.yaml").symlink_to(elsewhere / "secret.yaml")
    (registry / "folder").symlink_to(elsewhere, target_is_directory=True)
    (registry / "relative.yaml").symlink_to(Path("..") / "elsewhere" / "secret.yaml")
    (registry / "alias.yaml").symlink_to("inside.yaml")
    reports = {r.path: r for r in (check_file(f) for f in discover([str(registry)]))}
    by_name = {Path(p).name: r for p, r in reports.items()}
    for name in ("secret.yaml", "relative.yaml"):
        assert "outside the registry" in by_name[name].findings[0].message
        assert by_name[name].document is None  # never opened
    assert "folder outside the registry; it was not followed" in by_name["folder"].findings[0].message
    assert by_name["alias.yaml"].spec is not None  # a link inside the registry is an ordinary file
    assert by_name["inside.yaml"].spec is not None


def test_symlink_loop_and_broken_link(tmp_path):
    (tmp_path / "loop.yaml").symlink_to(tmp_path / "loop.yaml")
    (tmp_path / "a.yaml").symlink_to(tmp_path / "b.yaml")
    (tmp_path / "b.yaml").symlink_to(tmp_path / "a.yaml")
    (tmp_path / "broken.yaml").symlink_to(tmp_path / "gone.yaml")
    messages = {Path(r.path).name: r.findings[0].message for r in map(check_file, discover([str(tmp_path)]))}
    assert messages["loop.yaml"] == messages["a.yaml"] == "is a symbolic link loop; it points back to itself"
    assert "is a broken symbolic link: its target" in messages["broken.yaml"]


def test_fifo_does_not_hang(tmp_path):
    os.mkfifo(tmp_path / "pipe.yaml")
    report = check_file(_spec(tmp_path / "pipe.yaml"))
    assert "is not a regular file (a device, pipe or socket)" in report.findings[0].message


def test_unreadable_file(tmp_path, monkeypatch):
    path = tmp_path / "locked.yaml"
    path.write_text(_valid("locked"), encoding="utf-8")
    path.chmod(0)
    try:
        if os.geteuid() != 0:
            report = check_file(_spec(path))  # permission bits block the read
        else:
            # root reads through chmod 000, so the refusal is simulated where the loader opens files.
            import registry.yamlio as yamlio

            real_open = os.open

            def refusing_open(file, flags, *args, **kwargs):
                if Path(file) == path:
                    raise PermissionError(13, "Permission denied", str(file))
                return real_open(file, flags, *args, **kwargs)

            monkeypatch.setattr(yamlio.os, "open", refusing_open)
            report = check_file(_spec(path))
    finally:
        path.chmod(0o644)
    assert report.findings[0].message == "cannot be read: permission denied: prespec may not read it"
    assert report.findings[0].severity == "error"


def test_folder_named_like_a_spec_is_searched_not_read(tmp_path):
    folder = tmp_path / "odd.yaml"
    folder.mkdir()
    (folder / "inner.yaml").write_text(_valid("inner"), encoding="utf-8")
    files = discover([str(tmp_path)])
    assert [f.path.name for f in files] == ["inner.yaml"]
    report = check_file(_spec(folder))  # named directly, as a caller might
    assert report.findings[0].message == "cannot be read: it is a folder, not a spec file"


def test_control_characters_in_file_names_are_escaped(run, tmp_path):
    (tmp_path / "bad\x1b[2Jname.yaml").write_text("title: x\n", encoding="utf-8")
    (tmp_path / "[bold]markup.yaml").write_text("id: '[/bold]'\n", encoding="utf-8")
    result = run("check", str(tmp_path))
    assert result.status == 1
    assert "\x1b" not in result.out
    assert "bad\\x1b[2Jname.yaml" in result.out
    assert "[bold]markup.yaml" in result.out


def test_check_works_outside_a_git_repository(run, tmp_path):
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", tmp_path / "fibre-butyrate.yaml")
    assert not any((parent / ".git").exists() for parent in (tmp_path, *tmp_path.parents))
    result = run("check", str(tmp_path))
    assert result.status == 0, result.out + result.err
    assert "fibre-butyrate" in result.out


def test_every_finding_names_its_file_in_text_output(run, tmp_path):
    for name in ("tab-indentation.yaml", "alpha-percent.yaml", "empty.yaml", "two-documents.yaml"):
        shutil.copy(SPECS / name, tmp_path / name)
    result = run("check", str(tmp_path))
    for name, where in [("tab-indentation.yaml", ":8:1"), ("alpha-percent.yaml", ":8:10"), ("empty.yaml", ""),
                        ("two-documents.yaml", ":16:1")]:
        assert f"{name}{where}" in result.out


@pytest.mark.parametrize("old, new", [
    ("alpha: 0.05", "alpha: 1.0e-300"),
    ("alpha: 0.05", "alpha: 1.0e-12"),
    ("power: 0.8", "power: 0.9999999999999999"),
    ("difference: 1.0", "difference: 1.0e+300"),
    ("difference: 1.0", "difference: -1.0e+300"),
    ("sd: 1.0", "sd: 1.0e-300"),
    ("sd: 1.0", "sd: 5.0e-324"),
    ("difference: 1.0", "difference: 5.0e-324"),
], ids=lambda v: v.replace(" ", ""))
def test_extreme_but_well_formed_numbers_give_a_finding_not_a_crash(run, tmp_path, old, new):
    # The model accepts these; whatever the engine makes of them, check reports and goes on.
    (tmp_path / "extreme.yaml").write_text(_valid("extreme").replace(old, new), encoding="utf-8")
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", tmp_path / "fibre-butyrate.yaml")
    result = run("check", "--json", str(tmp_path))
    assert result.status == 1 and "Traceback" not in result.out + result.err
    by_id = {spec["id"]: spec for spec in result.json()["specs"]}
    extreme = by_id["extreme"]
    assert any(f["severity"] == "error" and f["field"].startswith(("design", "sample_size"))
               for f in extreme["findings"]), extreme
    assert by_id["fibre-butyrate"]["verdict"] == "ok" and by_id["fibre-butyrate"]["required_per_group"]


def test_docs_state_the_caps_the_code_uses():
    # docs/errors.md documents the caps; it must not drift from the constants.
    from registry.model import Spec
    from registry.power.base import MAX_N
    from registry.yamlio import MAX_NUMBER_CHARS

    docs = (ROOT / "docs" / "errors.md").read_text(encoding="utf-8")
    id_max = next(m.max_length for m in Spec.model_fields["id"].metadata if hasattr(m, "max_length"))
    for value in (f"{MAX_FILE_BYTES:,} bytes", f"| {MAX_NODES:,} |", f"{MAX_DEPTH} levels", f"{MAX_NUMBER_CHARS} characters",
                  f"{MAX_N:,} per group", f"{id_max} characters"):
        assert value in docs, value
