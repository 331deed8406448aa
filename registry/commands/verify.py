"""``prespec verify``: a reviewer's check of a spec's registration against the git history, its RFC 3161
timestamp tokens (offline, against trust anchors the reviewer chooses) and the tag's signature."""

from __future__ import annotations

import argparse
import json
import unicodedata
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..discovery import UsageError
from ..problems import InvalidSpec, json_escaped

if TYPE_CHECKING:
    from ..audit import Registration
    from ..git import Repository

__all__ = ["verify", "HELP", "add_arguments", "run"]

HELP = ("check a spec's registration: tag present and before the start, hash matching, no unamended change "
        "since, timestamp tokens and signature")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="the registry (default: .)")
    parser.add_argument("--trust", action="append", default=[], metavar="FILE",
                        help="a PEM CA certificate to check timestamp tokens against (repeatable; replaces the "
                        "registry's timestamp.trust)")
    parser.add_argument("--allowed-signers", metavar="FILE",
                        help="an SSH allowed-signers file to check an SSH-signed tag against")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def run(args: argparse.Namespace) -> int:
    return verify(args.spec, args.paths or ["."], as_json=args.json, trust=args.trust,
                  allowed_signers=args.allowed_signers)


@dataclass(frozen=True)
class _Check:
    name: str
    ok: bool
    detail: str


@dataclass
class _Outcome:
    """Everything verify found, for the JSON contract and the human output."""

    checks: list[_Check] = field(default_factory=list)
    registration: Registration | None = None
    digest: str | None = None
    start: date | None = None
    timestamp: dict[str, Any] | None = None
    timestamp_failed: bool = False
    signature: dict[str, Any] | None = None
    signature_failed: bool = False
    deviations: list[str] = field(default_factory=list)
    trust_source: str = ""


def _plain(text: object) -> str:
    """User text (tag messages, names) safe for a terminal: control characters escaped."""
    return "".join(ch if ch in "\n" or unicodedata.category(ch)[0] != "C" else f"\\u{ord(ch):04x}"
                   for ch in str(text))


def _repository(target: str, paths: list[str]) -> tuple[Repository, str, list[str], dict[str, str], Path | None,
                                                         bool]:
    from ..audit import find_spec
    from ..config import find_config, load_config
    from ..git import find_repository

    try:
        spec_file, report = find_spec(target, paths)
    except UsageError:
        spec_file = None  # deleted from the working tree: the tags still tell
        report = None
    where = spec_file.path.absolute() if spec_file else Path(paths[0]).absolute()
    repo = find_repository(where)
    if repo is None:
        raise UsageError(f"{where} is not inside a git repository; registrations are git tags")
    extra: list[str] = []
    spec_id = report.id if report and report.id else target
    known: dict[str, str] = {}
    config_path = find_config(spec_file.root if spec_file else where)
    if spec_file is not None:
        try:
            extra = load_config(config_path).locked_fields
        except InvalidSpec:
            pass
        relpath = repo.relpath(spec_file.path)
        known = {relpath: spec_id} if relpath else {}
    return repo, spec_id, extra, known, config_path, spec_file is not None


def verify(target: str, paths: list[str], *, as_json: bool = False, now: datetime | None = None,
           trust: list[str] | None = None, allowed_signers: str | None = None) -> int:
    from ..audit import registrations
    from ..checks import CAUTION
    from ..git import GitProblem

    repo, spec_id, extra, known, config_path, found = _repository(target, paths)
    if not found:
        try:
            tagged = registrations(repo, spec_id)
        except GitProblem:
            tagged = []
        if not tagged:
            raise UsageError(f"no spec with id {target!r} under {', '.join(paths)} and no registration tag "
                             f"prespec/{target}/vN (give the id of a spec, or a spec file)")
    anchors, trust_source, trust_problem = _anchors(trust or [], config_path)
    outcome = _Outcome(trust_source=trust_source)
    try:
        _verify(repo, spec_id, extra, known, now or datetime.now(timezone.utc), outcome)
        if outcome.registration is not None and outcome.registration.problem is None:
            _timestamps(outcome, spec_id, anchors, trust_problem)
            _signature(repo, outcome, Path(allowed_signers) if allowed_signers else None)
    except GitProblem as error:
        outcome.checks.append(_Check("registration tag", False, f"git in {repo.root} cannot read the tags: {error}"))
    problems = [f"{c.name}: {c.detail}" for c in outcome.checks if not c.ok]
    if outcome.timestamp_failed and outcome.timestamp:
        problems += [f"timestamp: {p}" for p in outcome.timestamp["problems"]]
    if outcome.signature_failed and outcome.signature:
        problems.append(f"signature: {outcome.signature.get('detail')}")
    holds = not problems
    reg = outcome.registration
    sentence = _evidence(outcome, holds)
    if as_json:
        signature = None if outcome.signature is None else {
            k: outcome.signature[k] for k in ("kind", "verified", "signer")}
        print(json_escaped(json.dumps({
            "id": spec_id, "version": reg.version if reg else None, "holds": holds, "sha256": outcome.digest,
            "commit": reg.tag.commit if reg else None, "timestamp": outcome.timestamp, "signature": signature,
            "problems": problems, "evidence": sentence, "deviations": outcome.deviations,
            "checks": [c.__dict__ for c in outcome.checks], "caution": CAUTION}, indent=2, ensure_ascii=False)))
        return 0 if holds else 1
    print(_plain(sentence))
    for check in outcome.checks:
        print(_plain(f"{'ok  ' if check.ok else 'FAIL'}  {check.name}: {check.detail}"))
    if outcome.timestamp is not None:
        ts = outcome.timestamp
        mark = "ok  " if ts["verified"] and ts["before_start"] else "FAIL" if outcome.timestamp_failed else "--  "
        print(_plain(f"{mark}  timestamp: {ts['time']} by {ts['authority']}"
                     + ("; " + "; ".join(ts["problems"]) if ts["problems"] else "; signature and chain verified")))
    if outcome.signature is not None:
        sig = outcome.signature
        mark = "ok  " if sig["verified"] else "FAIL" if outcome.signature_failed else "--  "
        print(_plain(f"{mark}  signature ({sig['kind']}): {sig['detail']}"))
    for deviation in outcome.deviations:
        print(_plain(f"note  disclosed deviation: {deviation}"))
    if outcome.digest:
        print(f"content sha256 {outcome.digest}")
    print(_plain(f"{spec_id}: {'registration holds' if holds else 'registration does NOT hold'}"
                 + (" for the fields that did not change" if holds and outcome.deviations else "")))
    print(f"Note: {CAUTION}")
    return 0 if holds else 1


def _anchors(trust: list[str], config_path: Path | None) -> tuple[list[Any], str, str | None]:
    """(certificates, where they came from, why there are none or they cannot be used)."""
    from ..config import load_config, trust_paths

    from ..timestamp import InvalidTrust, load_trust

    if trust:
        paths, source = [Path(t) for t in trust], "--trust"
    else:
        try:
            paths = trust_paths(config_path, load_config(config_path))
        except InvalidSpec as error:
            return [], "", f"the registry's timestamp.trust cannot be used: {error}"
        source = "the registry's own .prespec.yaml (chosen by the lab; pass --trust to use your own)"
    if not paths:
        return [], "", None
    try:
        return load_trust(paths), source, None
    except InvalidTrust as error:
        if trust:  # the reviewer's own file: a usage mistake
            raise UsageError(f"--trust: {error}") from None
        return [], "", str(error)


def _evidence(outcome: _Outcome, holds: bool) -> str:
    """The one sentence the human output leads with: which evidence there is and how strong it is."""
    if outcome.registration is None:
        return ("Not registered: no registration tag records this spec, so nothing shows its design was fixed "
                "before data collection started.")
    parts = []
    ts, sig = outcome.timestamp, outcome.signature
    if ts and ts["verified"] and ts["before_start"]:
        parts.append(f"independent time: {ts['authority']} dated this registration {ts['time']}, before the start "
                     f"({outcome.start}); trust anchor from {outcome.trust_source}")
    if sig and sig["verified"]:
        parts.append(f"identity: the tag is signed by {sig['signer']} ({sig['kind']})")
    if not parts:
        parts.append("self-asserted dates only: the commit and tag dates come from the lab's own clock"
                     + ("; the timestamp token was not checked" if ts and not outcome.timestamp_failed else ""))
    lead = "Evidence: " + " and ".join(parts) + "."
    return lead if holds else "The registration does not hold. " + lead


def _timestamps(outcome: _Outcome, spec_id: str, anchors: list[Any], trust_problem: str | None) -> None:
    from ..registration import parse_tokens
    from ..timestamp import check_token, statement

    reg = outcome.registration
    assert reg is not None
    tokens = parse_tokens(reg.tag.message)
    if not tokens:
        return
    if outcome.digest is None or outcome.start is None:
        outcome.timestamp = {"time": None, "authority": tokens[0][0], "verified": False, "before_start": False,
                             "problems": ["the registered content cannot be recomputed, so the token cannot be "
                                          "compared with it"]}
        outcome.timestamp_failed = True
        return
    text = statement(spec_id, reg.version, outcome.digest, reg.tag.commit)
    results = [check_token(reply, text, outcome.start, anchors) for _, reply in tokens]
    if trust_problem:
        for result in results:
            result.problems = [p for p in result.problems if not p.startswith("no trust anchor")] + [trust_problem]
    best = next((r for r in results if r.verified), results[0])
    outcome.timestamp = best.to_dict()
    failed = [r for r in results if r.failed]
    if failed:
        outcome.timestamp_failed = True
        if best.verified:  # another token is bad: say so too
            outcome.timestamp["problems"] += [p for r in failed for p in r.problems]


def _signature(repo: Repository, outcome: _Outcome, allowed_signers: Path | None) -> None:
    reg = outcome.registration
    assert reg is not None
    message = reg.tag.message
    kind = ("gpg" if "-----BEGIN PGP SIGNATURE-----" in message else
            "ssh" if "-----BEGIN SSH SIGNATURE-----" in message else
            "x509" if "-----BEGIN SIGNED MESSAGE-----" in message else None)
    if kind is None:
        return
    status, said = repo.verify_tag(reg.tag.name, allowed_signers)
    said = _plain(said).strip()
    signer = None
    for line in said.splitlines():
        if line.startswith("Good \"git\" signature for "):
            signer = line.removeprefix("Good \"git\" signature for ").split(" with ")[0]
        elif "Good signature from " in line:
            signer = line.split("Good signature from ", 1)[1].strip().strip('"')
    verified = status == 0 and signer is not None
    lowered = said.lower()
    bad = any(word in lowered for word in ("bad signature", "incorrect signature", "signature verification failed"))
    if verified:
        detail = f"good signature by {signer}"
    elif bad:
        detail = f"the signature does not match the tag: the tag was altered after it was signed ({said})"
    elif kind == "ssh" and allowed_signers is None:
        detail = ("SSH-signed, not checked: pass --allowed-signers FILE (the lab's keys, obtained from the lab "
                  "through another channel)")
    else:
        detail = f"signed, but the signer is not known to you: {said or 'git could not check it'}"
    outcome.signature = {"kind": kind, "verified": verified, "signer": signer, "detail": detail}
    outcome.signature_failed = bad


def _verify(repo: Repository, spec_id: str, extra: list[str], known: dict[str, str], now: datetime,
            outcome: _Outcome) -> None:
    from ..audit import registrations
    from ..canonical import content_hash
    from ..git import GitProblem
    from ..history import FUTURE_TOLERANCE, commit_day
    from ..validation import validate_document
    from ..yamlio import load_bytes

    checks = outcome.checks
    regs = registrations(repo, spec_id)
    if not regs:
        checks.append(_Check("registration tag", False, f"not registered: no tag prespec/{spec_id}/vN in this "
                             "repository (if the lab registered it, fetch the tags: git fetch --tags)"))
        return
    latest = outcome.registration = regs[-1]
    tag = latest.tag
    checks.append(_Check("registration tag", latest.problem is None and latest.fields.get("id") == spec_id,
                         f"{tag.name} by {tag.tagger} on {tag.tagged_date}" if latest.problem is None
                         else f"{tag.name}: {latest.problem}"))
    if latest.problem is not None:
        return
    fields = latest.fields
    checks.append(_Check("reachable from HEAD", tag.reachable,
                         f"{tag.name} -> {tag.commit[:10]}" + ("" if tag.reachable else
                                                               ": not in HEAD's history (rewritten history?)")))
    checks.append(_Check("recorded commit", fields["commit"] == tag.commit,
                         f"the block records {fields['commit'][:10]}, the tag points at {tag.commit[:10]}"))
    try:
        start = date.fromisoformat(fields["start"])
        commit = repo.commit_info(tag.commit)
        parents = [repo.commit_info(parent) for parent in commit.parents]
    except (ValueError, GitProblem) as error:
        checks.append(_Check("before the start", False, f"cannot read the start or the commit: {error}"))
        return
    outcome.start = start
    before = commit_day(commit.committer_date) < start and (
        tag.tagged_date is None or commit_day(tag.tagged_date) < start)
    # a date set in the future, or before the parent's, is no evidence that anything came before the start
    doubts = []
    if commit.committer_date > now + FUTURE_TOLERANCE:
        doubts.append(f"the commit is dated after now ({now.isoformat(timespec='minutes')})")
    if tag.tagged_date is not None and tag.tagged_date > now + FUTURE_TOLERANCE:
        doubts.append(f"the tag is dated after now ({now.isoformat(timespec='minutes')})")
    doubts += [f"the commit is dated before its parent {p.short} ({p.committer_date.isoformat(timespec='minutes')})"
               for p in parents if commit.committer_date < p.committer_date]
    if tag.tagged_date is not None and tag.tagged_date + FUTURE_TOLERANCE < commit.committer_date:
        doubts.append("the tag is dated before the commit it points at")
    checks.append(_Check("before the start", before and not doubts,
                         f"commit dated {commit.committer_date.isoformat(timespec='minutes')}, tag dated "
                         f"{tag.tagged_date.isoformat(timespec='minutes') if tag.tagged_date else '-'}, "
                         f"start {start}" + ("; but " + "; ".join(doubts) + ": these dates were set by hand or by "
                                             "a wrong clock and prove nothing" if doubts else "")))
    try:
        raw = repo.blob_at(tag.commit, fields["path"])
    except GitProblem as error:
        checks.append(_Check("content hash", False, f"{fields['path']} at {tag.commit[:10]} cannot be read: {error}"))
        checks.append(_after_registration(repo, spec_id, tag.commit, extra, known, now, outcome))
        return
    digest = None
    if raw is not None:
        try:
            spec = validate_document(load_bytes(raw, fields["path"]))
            digest = content_hash(spec)
            if spec.data_collection.start != start:
                checks.append(_Check("recorded start", False, f"the spec at the tag says {spec.data_collection.start}"))
        except InvalidSpec as error:
            checks.append(_Check("content hash", False, f"{fields['path']} at {tag.commit[:10]} is not valid: {error}"))
            return
    outcome.digest = digest
    checks.append(_Check("content hash", digest == fields["content-sha256"],
                         f"sha256 {fields['content-sha256']} recorded; "
                         + ("matches" if digest == fields["content-sha256"] else
                            f"{fields['path']} at the tag gives {digest or 'nothing (missing)'}")))
    checks.append(_after_registration(repo, spec_id, tag.commit, extra, known, now, outcome))


def _after_registration(repo: Repository, spec_id: str, registered: str, extra: list[str],
                        known_paths: dict[str, str], now: datetime, outcome: _Outcome) -> _Check:
    from ..audit import read_history
    from ..git import GitProblem
    from ..history import show_change

    try:
        registry = read_history(repo, known_paths)
        registry.now = now
        known = repo.ancestors(registered)
    except GitProblem as error:
        return _Check("no unamended change since", False, f"the git history of {repo.root} cannot be read: {error}")
    history = registry.history(spec_id, extra, detail=True)
    problems = []
    if registry.shallow:
        problems.append("the repository is a shallow clone; fetch the full history (git fetch --unshallow)")
    for revision in history.revisions:
        if revision.commit.sha in known:
            continue
        if revision.action == "removed" and spec_id not in registry.head_ids:
            problems.append(f"deleted in {revision.commit.short}")
        for change in revision.changes:
            if change.locked and not change.amended and getattr(change, "disclosure", None) is None:
                problems.append(f"{change.field} {show_change(change.old, change.new)} in "
                                f"{revision.commit.short} ({revision.commit.committer_date.date()})")
            elif change.locked and getattr(change, "disclosure", None) is not None:
                outcome.deviations.append(f"{change.field} {show_change(change.old, change.new)} in "
                                          f"{revision.commit.short} ({revision.commit.committer_date.date()})")
    for finding in history.findings:
        if finding.kind in ("drift", "incomplete-history", "history-unreadable") and finding.message not in problems:
            if finding.kind == "incomplete-history" and registry.shallow:
                continue
            problems.append(finding.message)
    later = sum(1 for r in history.revisions if r.commit.sha not in known)
    detail = "; ".join(problems) if problems else f"{later} later commit(s) touch the spec, no unamended locked change"
    return _Check("no unamended change since", not problems, detail)
