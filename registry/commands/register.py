"""``prespec register``: record a spec's registration as an annotated (or signed) git tag, with RFC 3161
timestamp tokens from independent time-stamping authorities when the registry names any."""

from __future__ import annotations

import argparse
import json
import sys
from datetime import date, datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .. import __version__
from ..discovery import UsageError
from ..problems import InvalidSpec, json_escaped, plain_text
from ..registration import format_message, tag_name

if TYPE_CHECKING:
    from ..git import Repository

__all__ = ["register", "HELP", "add_arguments", "run"]

HELP = ("register a committed spec before data collection starts: an annotated git tag prespec/<id>/vN, "
        "with RFC 3161 timestamp tokens when authorities are configured")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id (or its file)")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="where to look for the id (default: .)")
    parser.add_argument("--tsa", action="append", default=[], metavar="URL",
                        help="an RFC 3161 time-stamping authority to ask (repeatable; replaces timestamp.authorities "
                        "of .prespec.yaml)")
    parser.add_argument("--timestamp-request", metavar="FILE.tsq",
                        help="write the RFC 3161 request to FILE.tsq for an authority reached by portal or e-mail, "
                        "and register nothing yet")
    parser.add_argument("--timestamp-reply", metavar="FILE.tsr",
                        help="register with the authority's reply to an earlier --timestamp-request")
    parser.add_argument("--timeout", type=float, metavar="SECONDS",
                        help="seconds to wait for each authority (default: timestamp.timeout, 20)")
    parser.add_argument("--json", action="store_true", help="print the registration as JSON")


def run(args: argparse.Namespace) -> int:
    if args.timeout is not None and not 0 < args.timeout <= 300:
        raise UsageError(f"--timeout {args.timeout:g}: give a number of seconds above 0 and at most 300")
    if args.timestamp_request and args.timestamp_reply:
        raise UsageError("--timestamp-request writes a request and --timestamp-reply registers with its reply: "
                         "give one of them")
    return register(args.spec, args.paths or ["."], authorities=args.tsa, request_file=args.timestamp_request,
                    reply_file=args.timestamp_reply, timeout=args.timeout, as_json=args.json)


def _refuse(reasons: list[str]) -> int:
    print("prespec register: refused:", file=sys.stderr)
    for reason in reasons:
        print(f"  - {plain_text(reason)}", file=sys.stderr)
    return 1


def _template_reasons(report: Any) -> list[str]:
    reasons = [f"{report.path}: {f.field}: {f.message}" for f in report.findings if f.kind == "template-text"]
    if report.spec is not None and report.spec.status == "draft":
        reasons.append(f"{report.path}: status is 'draft'; set it to 'planned' once the design is final, commit, "
                       "and register again")
    return reasons


def register(target: str, paths: list[str], *, authorities: list[str] | None = None,
             request_file: str | None = None, reply_file: str | None = None, timeout: float | None = None,
             as_json: bool = False, today: date | None = None, now: datetime | None = None) -> int:
    from ..audit import find_spec, registrations
    from ..config import find_config, load_config, trust_paths
    from ..git import GitProblem, find_repository

    now = now or datetime.now(timezone.utc)
    today = today or now.astimezone().date()
    spec_file, report = find_spec(target, paths)
    repo = find_repository(spec_file.path.absolute())
    if repo is None:
        raise UsageError(f"{report.path} is not inside a git repository; a registration is a git tag")
    spec = report.spec
    errors = [f for f in report.findings if f.severity == "error"]
    if spec is None or errors:
        return _refuse([f"{report.path}: {f.kind} {f.field + ': ' if f.field else ''}{f.message}" for f in errors]
                       + ["fix the spec and run 'prespec check' until it passes"])
    config_path = find_config(spec_file.root)
    try:
        config = load_config(config_path)
        trust = trust_paths(config_path, config)
    except InvalidSpec as error:
        return _refuse([f"the registry settings cannot be used:\n{error}"])
    reasons = _template_reasons(report)
    try:
        reasons += _git_reasons(repo, spec_file.path, report.path, now)
        existing = registrations(repo, spec.id)
    except GitProblem as error:
        return _refuse([f"git in {repo.root} cannot read the repository: {error}; run 'git fsck' there"])
    start = spec.data_collection.start
    if today >= start:
        reasons.append(f"data collection started on {start} (today is {today}); a registration must come "
                       "before the start")
    relpath, head = repo.relpath(spec_file.path), repo.head()
    if relpath is not None and not _is_utf8(relpath):
        reasons.append(f"{plain_text(relpath)}: the file's path is not UTF-8 text (the bytes shown as \\x..); the "
                       "registration tag records the path as text, and a path it cannot hold could never be "
                       "verified: rename the file (and its folders) to UTF-8 names, commit, and register again")
    digest = None
    if not reasons:
        assert relpath is not None and head is not None
        digest = _committed_hash(repo, head, relpath, reasons)
    if digest is not None and existing and existing[-1].fields.get("content-sha256") == digest \
            and existing[-1].tag.reachable:
        reasons.append(f"{existing[-1].tag.name} already registers this content (sha256 {digest[:16]}...)")
    if reasons:
        return _refuse(reasons)
    assert relpath is not None and head is not None and digest is not None
    version = max((r.version for r in existing), default=0) + 1
    name = tag_name(spec.id, version)
    from ..timestamp import TimestampError, statement

    text = statement(spec.id, version, digest, head)
    if request_file is not None:
        return _write_request(request_file, text, spec.id, paths)
    try:
        asked = authorities or ([] if reply_file else config.timestamp.authorities)
        tokens = _tokens(text, asked, reply_file,
                         timeout or config.timestamp.timeout, trust, start)
    except TimestampError as error:
        return _refuse([str(error), "no tag was made; try again, or register without an authority"])
    message = format_message({"id": spec.id, "path": relpath, "commit": head, "start": start.isoformat(),
                              "content-sha256": digest, "tool": f"prespec {__version__}"}, tokens)
    sign = repo.signing_configured()
    try:
        repo.create_tag(name, head, message, sign=sign)
    except GitProblem as error:
        return _refuse([str(error)])
    evidence = (f"time set by {len(tokens)} independent time-stamping authorit{'y' if len(tokens) == 1 else 'ies'}"
                if tokens else "self-asserted date: no time-stamping authority was asked, so the registration's date "
                "is the lab's own clock (set timestamp.authorities in .prespec.yaml or pass --tsa URL)")
    if as_json:
        print(json_escaped(json.dumps({"id": spec.id, "version": version, "tag": name, "commit": head, "sha256": digest,
                          "signed": sign, "timestamps": [_token_summary(a, r) for a, r in tokens],
                          "evidence": evidence}, indent=2, ensure_ascii=False)))
        return 0
    print(f"registered {spec.id} as {'signed ' if sign else ''}tag {name} on commit {head[:10]}")
    print(f"content sha256 {digest}")
    for authority, reply in tokens:
        summary = _token_summary(authority, reply)
        print(plain_text(f"timestamp from {authority}: {summary['time']}"))
    print(plain_text(f"evidence: {evidence}"))
    print(f"share it with reviewers: git push <remote> {name}")
    return 0


def _is_utf8(path: str) -> bool:
    """Whether ``path`` is text: a name that is not UTF-8 holds the bytes as lone surrogates."""
    try:
        path.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


def _committed_hash(repo: Repository, head: str, relpath: str, reasons: list[str]) -> str | None:
    """The content hash of the spec as committed at ``head`` (the blob the tag vouches for)."""
    from ..canonical import content_hash

    from ..validation import validate_document
    from ..yamlio import load_bytes

    raw = repo.blob_at(head, relpath)
    if raw is None:
        reasons.append(f"{relpath} is not in commit {head[:10]}; commit it first")
        return None
    try:
        return content_hash(validate_document(load_bytes(raw, relpath)))
    except InvalidSpec as error:
        reasons.append(f"the committed version of {relpath} is not valid:\n{error}")
        return None


def _token_summary(authority: str, reply: bytes) -> dict[str, Any]:
    from rfc3161_client import decode_timestamp_response

    when = decode_timestamp_response(reply).tst_info.gen_time
    when = when if when.tzinfo else when.replace(tzinfo=timezone.utc)
    return {"authority": authority, "time": when.astimezone(timezone.utc).isoformat().replace("+00:00", "Z")}


def _write_request(request_file: str, text: bytes, spec_id: str, paths: list[str]) -> int:
    from ..fsutil import WriteRefused, write_atomic
    from ..timestamp import make_request

    request = make_request(text)
    try:
        written = write_atomic(Path(request_file), request.der, overwrite=False)
    except (WriteRefused, OSError) as error:
        return _refuse([f"cannot write {request_file}: {error}"])
    where = " ".join(paths) if paths != ["."] else ""
    print(plain_text(f"wrote the RFC 3161 request to {written}; nothing is registered yet"))
    print(plain_text("send it to your time-stamping authority (content type application/timestamp-query), keep "
                     f"the reply, and run: prespec register {spec_id} {where + ' ' if where else ''}"
                     "--timestamp-reply REPLY.tsr"))
    print("commit nothing in between: the request names the current commit")
    return 0


def _tokens(text: bytes, authorities: list[str], reply_file: str | None, timeout: float, trust: list[Path],
            start: date) -> list[tuple[str, bytes]]:
    """Every authority's reply for ``text`` (:class:`TimestampError` on the first that fails)."""
    from ..timestamp import TimestampError, accept_reply, ask_authority, check_token, load_trust, make_request

    tokens = []
    if reply_file is not None:
        try:
            data = Path(reply_file).read_bytes()
        except OSError as error:
            raise TimestampError(f"cannot read {reply_file}: {error.strerror or error}") from None
        tokens.append(("offline reply " + Path(reply_file).name,
                       accept_reply(data, text, None, source=reply_file)))
    for url in authorities:
        tokens.append((url, ask_authority(url, make_request(text), text, timeout=timeout)))
    for source, reply in tokens:
        check = check_token(reply, text, start, [])
        if not check.before_start or check.time is None:
            raise TimestampError(f"the token from {source} is dated {check.to_dict()['time']}, not before the start "
                                 f"of data collection ({start}): it cannot show that the design came first")
    if trust and tokens:
        try:
            anchors = load_trust(trust)
        except ValueError as error:
            raise TimestampError(str(error)) from None
        for source, reply in tokens:
            check = check_token(reply, text, start, anchors)
            if not check.verified:
                raise TimestampError(f"the token from {source} does not verify against timestamp.trust: "
                                     + "; ".join(check.problems))
    return tokens


def _git_reasons(repo: Repository, path: Path, shown: str, now: datetime) -> list[str]:
    """Why git's state forbids a registration now (:class:`GitProblem` when git cannot tell)."""
    from ..history import FUTURE_TOLERANCE

    reasons = []
    relpath = repo.relpath(path)
    head = repo.head()
    if relpath is None or head is None or not repo.is_tracked(relpath):
        return [f"{shown} is not committed; commit it first"]
    repo.blob_at(head, relpath)  # the committed version must be readable: the tag vouches for it
    commit = repo.commit_info(head)
    if commit.committer_date > now + FUTURE_TOLERANCE:
        reasons.append(f"HEAD ({commit.short}) is dated {commit.committer_date.isoformat(timespec='minutes')}, "
                       "later than now: a date set by hand or by a wrong clock; fix the clock and commit again")
    dirty = repo.dirty_paths()
    if dirty:
        shown = ", ".join(dirty[:5]) + (" ..." if len(dirty) > 5 else "")
        reasons.append(f"the working tree has uncommitted changes ({shown}); commit or stash them so the "
                       "registration records exactly what is committed")
    return reasons
