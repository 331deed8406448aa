"""Property tests: valid specs survive dump -> load -> validate unchanged; mangled specs only ever
produce findings, never an unhandled exception.

The strategy is built from the spec model: every family registered in the catalog, the
literal values the model allows, unicode text, dates and the optional fields.
"""

from __future__ import annotations

import io
import json
import string
import typing
from datetime import date, timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from registry.checks import check_file
from registry.discovery import SpecFile
from registry.model import Spec
from registry.power.base import Alternative
from registry.power.catalog import FAMILIES
from registry.report import console, print_findings, print_table, to_json
from registry.validation import validate_document
from registry.yamlio import dump, load_text

STATUSES = list(typing.get_args(Spec.model_fields["status"].annotation))
ALTERNATIVES = list(typing.get_args(Alternative))
SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Text a person might type in any script: letters, marks, numbers, punctuation, symbols, spaces.
_TEXT_CHARS = st.characters(whitelist_categories=("L", "M", "N", "P", "S", "Zs"))
ids = st.from_regex(r"[a-z0-9]{1,8}(-[a-z0-9]{1,8}){0,3}", fullmatch=True)
short_text = st.text(_TEXT_CHARS, min_size=1, max_size=40).filter(lambda t: t.strip() == t and t)
long_text = st.text(_TEXT_CHARS | st.sampled_from("\n\t"), min_size=1, max_size=200)
dates = st.dates(min_value=date(2000, 1, 1), max_value=date(2100, 12, 31))


#: Effect fields any positive factor leaves valid (differences, SDs, standardized sizes, margins).
_SCALABLE = {"difference", "sd", "sd1", "sd2", "d", "margin", "median_control"}


@st.composite
def designs(draw):
    family = draw(st.sampled_from(FAMILIES))
    effect = {}
    for key, value in family.example.items():
        if key in _SCALABLE:
            effect[key] = float(value) * draw(st.floats(0.5, 3.0))  # same sign, nonzero: still a valid effect
        else:  # counts, probabilities and correlations keep their example values: scaling could break them
            effect[key] = value
    alpha = draw(st.floats(0.001, 0.2))
    design = {"test": family.name, "alpha": alpha, "power": draw(st.floats(max(0.5, alpha + 0.01), 0.99)),
              "effect": effect}
    if draw(st.booleans()):
        design["alternative"] = draw(st.sampled_from(ALTERNATIVES))
    if draw(st.booleans()):
        design["attrition"] = draw(st.floats(0.0, 0.5))
    if draw(st.booleans()):
        design["allocation_ratio"] = draw(st.floats(0.25, 4.0))
    for name in ("effect_rationale", "variability_source"):
        if draw(st.booleans()):
            design[name] = draw(long_text)
    return design


@st.composite
def specs(draw):
    start = draw(dates)
    spec = {
        "id": draw(ids),
        "title": draw(short_text),
        "status": draw(st.sampled_from(STATUSES)),
        "data_collection": {"start": start},
        "design": draw(designs()),
        "sample_size": {"per_group": draw(st.integers(1, 10_000))},
    }
    if draw(st.booleans()):
        spec["data_collection"]["end"] = start + timedelta(days=draw(st.integers(0, 3000)))
    for name in ("question", "population", "analysis_plan", "randomisation", "blinding", "stopping_rule", "notes"):
        if draw(st.booleans()):
            spec[name] = draw(long_text)
    count = draw(st.integers(0, 3))
    if count:
        primary = draw(st.integers(0, count - 1))
        spec["hypotheses"] = [{"statement": draw(long_text), "primary": i == primary,
                               **({"id": f"H{i + 1}"} if draw(st.booleans()) else {})} for i in range(count)]
    if draw(st.booleans()):
        spec["outcomes"] = {"primary": {"name": draw(short_text), "unit": draw(short_text)},
                            "secondary": [{"name": draw(short_text)} for _ in range(draw(st.integers(0, 2)))]}
    if draw(st.booleans()):
        spec["exclusion_criteria"] = draw(st.lists(long_text, max_size=3))
    if draw(st.booleans()):
        spec["amendments"] = [{"date": draw(dates), "fields": ["design.effect.sd"], "reason": draw(long_text)}]
    if draw(st.booleans()):
        spec["contacts"] = [{"name": draw(short_text), "email": "lab@example.org"}]
    return spec


@SETTINGS
@given(specs())
def test_valid_specs_round_trip_unchanged(data):
    expected = Spec.model_validate(data)
    text = dump(data)
    document = load_text(text, "generated.yaml")
    assert validate_document(document) == expected
    # CRLF and a byte-order mark do not change the meaning either.
    assert validate_document(load_text(text.replace("\n", "\r\n"), "crlf.yaml")) == expected


def _junk_values():
    return st.one_of(st.none(), st.booleans(), st.integers(-10**30, 10**30), st.floats(allow_nan=True),
                     st.text(max_size=30), st.lists(st.integers(), max_size=3),
                     st.dictionaries(st.text(string.ascii_lowercase, min_size=1, max_size=5), st.integers(), max_size=3),
                     st.sampled_from(["5%", "5 mg/L", "2027-02-30", "two-sample-z", "yes", ".nan", "1e999", "-0"]))


def _paths(value, prefix=()):
    yield prefix
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _paths(item, prefix + (key,))
    elif isinstance(value, list):
        for index, item in enumerate(value):
            yield from _paths(item, prefix + (index,))


def _parent(data, path):
    for part in path[:-1]:
        data = data[part]
    return data


@st.composite
def mangled_texts(draw):
    data = json.loads(json.dumps(draw(specs()), default=str))  # plain, mutable copy
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in _paths(data) if p]
        action = draw(st.sampled_from(["delete", "retype", "junk-key", "swap", "nest"]))
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _parent(data, path)
        if action == "delete":
            del parent[path[-1]]
        elif action == "retype":
            parent[path[-1]] = draw(_junk_values())
        elif action == "junk-key" and isinstance(parent, dict):
            parent[draw(st.text(min_size=1, max_size=12))] = draw(_junk_values())
        elif action == "swap":
            other = draw(st.sampled_from(paths))
            other_parent = _parent(data, other)
            try:
                parent[path[-1]], other_parent[other[-1]] = other_parent[other[-1]], parent[path[-1]]
            except (KeyError, IndexError):
                pass  # one path was inside the other and moved away: the data is mangled either way
        elif action == "nest":
            parent[path[-1]] = {"inner": [parent[path[-1]]]}
    text = dump(data)
    raw = text.encode("utf-8", errors="surrogatepass")
    damage = draw(st.sampled_from(["none", "truncate", "bytes", "insert"]))
    if damage == "truncate" and raw:
        raw = raw[: draw(st.integers(0, len(raw)))]
    elif damage == "bytes" and raw:
        at = draw(st.integers(0, len(raw) - 1))
        raw = raw[:at] + draw(st.binary(min_size=1, max_size=8)) + raw[at + 1:]
    elif damage == "insert":
        at = draw(st.integers(0, len(raw)))
        raw = raw[:at] + draw(st.sampled_from([b"\t", b": ", b"- ", b"&a ", b"*a", b"!!python/name:os.system ",
                                               b"'", b'"', b"{", b"[", b"\n  ", b"---\n", b"%YAML 1.1\n", b"\xff",
                                               b"\x00", b"\xef\xbb\xbf", b"<<: ", b"? "])) + raw[at:]
    return raw


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(mangled_texts())
def test_mangled_specs_only_ever_give_findings(tmp_path, raw):
    path = tmp_path / "mangled.yaml"
    path.write_bytes(raw)
    report = check_file(SpecFile(path, path.name, tmp_path))  # must not raise
    for finding in report.findings:
        assert finding.message and finding.severity in ("error", "warning", "info")
        assert "Traceback" not in finding.message
    if report.spec is None:
        assert any(f.kind == "invalid" for f in report.findings)
    # Showing the findings must not fail either (markup, control characters, odd unicode).
    out = console(io.StringIO())
    print_table(out, [report])
    print_findings(out, [report])
    json.loads(to_json([report]))


_YAML_PIECES = st.sampled_from(list("abc:-[]{},&*!|>'\"#%@`?\t\n\r 019.~\\<=") + [
    "\u2028", "\x85", "\ufeff", "é", "---", "...", "!!python/", "%YAML 1.2", "%TAG ! x", "0x", "0o", ".inf", "<<"])


@SETTINGS
@given(st.lists(_YAML_PIECES, max_size=60).map("".join))
def test_arbitrary_yaml_like_text_only_raises_invalid_spec(text):
    # Whatever the text, loading and validating either succeed or raise InvalidSpec with a message.
    from registry.problems import InvalidSpec

    try:
        validate_document(load_text(text, "fuzz.yaml"))
    except InvalidSpec as error:
        assert error.problems and all(p.message for p in error.problems)
        str(error)
