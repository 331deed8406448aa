"""Static guarantees over the registry/ package: safe YAML only, no shell, no eval, git by argument list.

These scan the source (AST, so comments and strings do not count); a failure names file and line.
"""

from __future__ import annotations

import ast

from .conftest import ROOT

SOURCES = sorted((ROOT / "registry").rglob("*.py"))


def _parsed():
    for path in SOURCES:
        yield path.relative_to(ROOT).as_posix(), ast.parse(path.read_text(encoding="utf-8"), filename=str(path))


def _dotted(node: ast.AST) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return f"{_dotted(node.value)}.{node.attr}"
    return ""


def _findings(check) -> list[str]:
    out = []
    for name, tree in _parsed():
        for node in ast.walk(tree):
            reason = check(node)
            if reason:
                out.append(f"{name}:{getattr(node, 'lineno', '?')}: {reason}")
    return out


def test_sources_are_scanned():
    names = {path.name for path in SOURCES}
    assert {"yamlio.py", "checks.py", "cli.py", "fsutil.py"} <= names


def test_no_shell():
    def check(node):
        if isinstance(node, ast.keyword) and node.arg == "shell":
            if not (isinstance(node.value, ast.Constant) and node.value.value is False):
                return "shell= must not be used"
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            if func in ("os.system", "os.popen", "subprocess.getoutput", "subprocess.getstatusoutput", "commands.getoutput") \
                    or func.startswith(("os.exec", "os.spawn", "os.posix_spawn")):
                return f"{func}() runs a shell or replaces the process"
        return None

    assert not _findings(check)


def test_no_eval_exec_or_unsafe_deserialisation():
    def check(node):
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            if func in ("eval", "exec", "compile", "builtins.eval", "builtins.exec"):
                return f"{func}() runs arbitrary code"
            if func in ("__import__", "importlib.import_module") and not all(isinstance(a, ast.Constant) for a in node.args):
                return f"{func}() of a computed name imports arbitrary code"
            if func.split(".")[-1] in ("loads", "load") and func.split(".")[0] in ("pickle", "marshal", "shelve", "dill"):
                return f"{func}() deserialises arbitrary objects"
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            modules = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
            for module in modules:
                if module.split(".")[0] in ("pickle", "marshal", "shelve"):
                    return f"import of {module}: unsafe deserialisation"
        return None

    assert not _findings(check)


def test_yaml_is_only_loaded_safely_and_only_in_yamlio():
    def check(node):
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            if func.split(".")[-1] in ("load", "load_all", "unsafe_load", "full_load", "safe_load", "construct_document"):
                return f"{func}() constructs objects from tags; build values through registry.yamlio"
            if func.split(".")[-1] == "YAML":
                for keyword in node.keywords:
                    if keyword.arg == "typ" and not (isinstance(keyword.value, ast.Constant)
                                                     and keyword.value.value in ("rt", "safe")):
                        return "YAML(typ=...) other than 'rt' (compose only) or 'safe'"
        return None

    assert not _findings(check)
    importers = sorted({name for name, tree in _parsed() for node in ast.walk(tree)
                       if isinstance(node, (ast.Import, ast.ImportFrom))
                       and any("ruamel" in (alias.name if isinstance(node, ast.Import) else node.module or "")
                               for alias in node.names)})
    assert importers == ["registry/yamlio.py"], importers
    # PyYAML's C parser composes historical versions fast; like ruamel it is used by yamlio alone,
    # for nodes and events only (no loader: the scan above rejects every load call).
    pyyaml = sorted({name for name, tree in _parsed() for node in ast.walk(tree)
                     if (isinstance(node, ast.Import) and any(a.name.split(".")[0] == "yaml" for a in node.names))
                     or (isinstance(node, ast.ImportFrom) and (node.module or "").split(".")[0] == "yaml")})
    assert pyyaml in ([], ["registry/yamlio.py"]), pyyaml


def test_yamlio_builds_values_itself():
    # yamlio composes nodes; it never asks ruamel to construct Python objects from a document.
    source = (ROOT / "registry" / "yamlio.py").read_text(encoding="utf-8")
    tree = ast.parse(source)
    calls = {_dotted(node.func).split(".")[-1] for node in ast.walk(tree) if isinstance(node, ast.Call)}
    assert "compose_all" in calls
    assert not calls & {"load", "load_all", "construct_document", "construct_object"}


def _process_calls(tree: ast.AST):
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            if func.startswith("subprocess.") or func in ("Popen", "run", "check_output", "check_call"):
                yield func, node


def test_processes_are_started_only_by_git_py_with_argument_lists():
    for name, tree in _parsed():
        for func, call in _process_calls(tree):
            if not func.startswith("subprocess."):
                continue
            assert name == "registry/git.py", f"{name}:{call.lineno}: {func}: only registry/git.py runs programs"
            first = call.args[0] if call.args else next((k.value for k in call.keywords if k.arg == "args"), None)
            assert isinstance(first, (ast.List, ast.Tuple, ast.Name, ast.Starred, ast.BinOp, ast.Call)), (
                f"{name}:{call.lineno}: {func} must get an argument list, not a command string")
            assert not isinstance(first, (ast.Constant, ast.JoinedStr)), f"{name}:{call.lineno}: command string"


def test_scanner_catches_what_it_is_meant_to():
    # The checks above must be able to fail: run them over a snippet holding each forbidden call.
    bad = ast.parse("import os, subprocess\nos.system('x')\nsubprocess.run('ls', shell=True)\neval('1')\n"
                    "from ruamel.yaml import YAML\nYAML(typ='unsafe').load(s)\n")
    kinds = set()
    for node in ast.walk(bad):
        if isinstance(node, ast.keyword) and node.arg == "shell":
            kinds.add("shell")
        if isinstance(node, ast.Call):
            func = _dotted(node.func)
            kinds.add({"os.system": "system", "eval": "eval"}.get(func, ""))
            if func.endswith(".load"):
                kinds.add("load")
            if func == "YAML" and any(k.arg == "typ" and k.value.value == "unsafe" for k in node.keywords):
                kinds.add("unsafe")
    assert {"shell", "system", "eval", "load", "unsafe"} <= kinds
