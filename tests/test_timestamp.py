"""RFC 3161 timestamp tokens and signed tags on registrations, end to end.

A throwaway time-stamping authority (tests/tsa_helpers.py: its own CA, a TSA certificate with
the critical extended key usage timeStamping of RFC 3161 section 2.3, answering over HTTP on
127.0.0.1 as RFC 3161 section 3.4 describes) signs real requests; ``register`` stores its replies
in the registration tag and ``verify`` checks them offline on another clone. Signed tags use
git's own SSH signing (``gpg.format ssh``) with a key made by ssh-keygen in the test.
References: RFC 3161 (the protocol and the checks a verifier makes), git's verify-tag, and the
SHA-256 of the statement recomputed here with hashlib.
"""

from __future__ import annotations

import hashlib
import shutil
import subprocess
from datetime import datetime, timedelta, timezone

import pytest
from asn1crypto import tsp

from registry.registration import format_message, parse_block, parse_tokens
from registry.timestamp import statement

from .history_helpers import Lab, spec_text
from .tsa_helpers import Server, closed_port_url, make_authority, reply_for

FUTURE = "2099-01-04"
BEFORE = "2020-01-10T10:00:00+01:00"
SPEC = "mouse-diet.yaml"


@pytest.fixture(scope="module")
def authority():
    return make_authority()


@pytest.fixture(autouse=True)
def _local_only(monkeypatch):
    # the test authority is on 127.0.0.1: never route it through a proxy the environment names
    monkeypatch.setenv("no_proxy", "127.0.0.1,localhost")
    monkeypatch.setenv("NO_PROXY", "127.0.0.1,localhost")


@pytest.fixture
def tsa(authority):
    server = Server(authority).start()
    yield server
    server.stop()


@pytest.fixture
def lab(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write(SPEC, spec_text(start=FUTURE, status="planned"))
    lab.commit("design", BEFORE)
    return lab


@pytest.fixture
def ca_pem(authority, tmp_path):
    return authority.ca_pem(tmp_path / "ca.pem")


def _tag(lab, name="prespec/mouse-diet/v1"):
    return next(t for t in lab.repo.tags("prespec") if t.name == name)


def _unchanged(lab, before: bytes) -> None:
    assert (lab.registry / SPEC).read_bytes() == before
    assert lab.repo.tags("prespec") == [] and lab.repo.dirty_paths() == []


def _retag(lab, tokens, *, name="prespec/mouse-diet/v1"):
    """Replace the registration tag with one holding ``tokens`` (what a forger would do)."""
    old = _tag(lab, name)
    fields = parse_block(old.message)
    lab.repo.delete_tag(name)
    lab.repo.tag_with_dates(name, old.commit, format_message(fields, tokens), tagger=("Lab lead", "lead@lab.example"),
                            date="2020-01-11T10:00:00+01:00")


def test_register_with_an_authority_and_verify_on_another_clone(lab, tsa, ca_pem, run, tmp_path):
    result = run("register", "mouse-diet", lab.registry, "--tsa", tsa.url, "--json")
    assert result.status == 0, result.err
    made = result.json()
    tag = _tag(lab)
    fields = parse_block(tag.message)
    # the request the authority received: SHA-256 imprint of the statement, with a nonce (RFC 3161 2.4.1)
    request = tsp.TimeStampReq.load(tsa.requests[0])
    text = statement("mouse-diet", 1, fields["content-sha256"], tag.commit)
    assert request["message_imprint"]["hashed_message"].native == hashlib.sha256(text).digest()
    assert request["message_imprint"]["hash_algorithm"]["algorithm"].native == "sha256"
    assert request["nonce"].native is not None and request["cert_req"].native is True
    assert made["version"] == 1 and made["commit"] == tag.commit and made["sha256"] == fields["content-sha256"]
    assert [t["authority"] for t in made["timestamps"]] == [tsa.url]
    assert [a for a, _ in parse_tokens(tag.message)] == [tsa.url]

    clone = lab.repo.clone(tmp_path / "reviewer")  # the reviewer's own clone: tags travel with it
    checked = run("verify", "mouse-diet", clone.root / "registry", "--trust", ca_pem, "--json")
    assert checked.status == 0, checked.out
    out = checked.json()
    assert {"id", "version", "holds", "sha256", "commit", "timestamp", "signature", "problems"} <= out.keys()
    assert out["holds"] is True and out["problems"] == [] and out["signature"] is None
    assert out["sha256"] == fields["content-sha256"] and len(out["sha256"]) == 64
    stamp = out["timestamp"]
    assert stamp["verified"] is True and stamp["before_start"] is True and stamp["problems"] == []
    assert stamp["authority"] == "CN=Test TSA,O=Test Time Authority"
    when = datetime.fromisoformat(stamp["time"].replace("Z", "+00:00"))
    assert abs(when - datetime.now(timezone.utc)) < timedelta(minutes=10)
    human = run("verify", "mouse-diet", clone.root / "registry", "--trust", ca_pem)
    assert human.status == 0 and human.out.startswith("Evidence: independent time")
    assert f"content sha256 {fields['content-sha256']}" in human.out


def test_authorities_and_trust_from_the_registry_settings(lab, tsa, ca_pem, run):
    shutil.copy(ca_pem, lab.root / "tsa-ca.pem")
    (lab.root / ".prespec.yaml").write_text(f"timestamp:\n  authorities: [{tsa.url}]\n  trust: [tsa-ca.pem]\n",
                                            encoding="utf-8")
    lab.commit("settings", "2020-01-10T11:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    out = run("verify", "mouse-diet", lab.registry, "--json").json()
    assert out["holds"] is True and out["timestamp"]["verified"] is True
    assert "own .prespec.yaml" in out["evidence"]  # the lab chose that anchor: the sentence says so


def test_without_an_authority_the_date_is_self_asserted(lab, run):
    made = run("register", "mouse-diet", lab.registry)
    assert made.status == 0 and "self-asserted" in made.out
    out = run("verify", "mouse-diet", lab.registry, "--json").json()
    assert out["holds"] is True and out["timestamp"] is None
    assert out["evidence"].startswith("Evidence: self-asserted dates only")


def test_a_token_without_trust_anchors_is_reported_unchecked(lab, tsa, run):
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    out = run("verify", "mouse-diet", lab.registry, "--json").json()
    assert out["timestamp"]["verified"] is False and "no trust anchor" in out["timestamp"]["problems"][0]
    assert out["holds"] is True and "self-asserted" in out["evidence"]


def test_a_backdated_token_fails_its_signature(lab, tsa, ca_pem, run):
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    (authority_url, reply), = parse_tokens(_tag(lab).message)
    forged = tsp.TimeStampResp.load(reply)
    info = forged["time_stamp_token"]["content"]["encap_content_info"]["content"].parsed
    info["gen_time"] = datetime(2019, 6, 1, tzinfo=timezone.utc)  # earlier than it was: the signature no longer fits
    forged["time_stamp_token"]["content"]["encap_content_info"]["content"] = \
        type(forged["time_stamp_token"]["content"]["encap_content_info"]["content"])(info.dump())
    _retag(lab, [(authority_url, forged.dump(force=True))])
    out = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json").json()
    assert out["holds"] is False and out["timestamp"]["verified"] is False
    assert any("signature does not verify" in p for p in out["timestamp"]["problems"])
    assert any(p.startswith("timestamp:") for p in out["problems"])


def test_a_damaged_token_is_a_finding(lab, tsa, ca_pem, run):
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    (url, reply), = parse_tokens(_tag(lab).message)
    _retag(lab, [(url, reply[: len(reply) // 2])])
    result = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json")
    assert result.status == 1 and result.json()["holds"] is False and "Traceback" not in result.err


def test_a_token_for_other_content_or_another_spec_fails_the_imprint(lab, tsa, authority, ca_pem, run):
    lab.write("other.yaml", spec_text("other-study", start=FUTURE, status="planned"))
    lab.commit("second design", "2020-01-10T12:00:00+01:00")
    assert run("register", "other-study", lab.registry, "--tsa", tsa.url).status == 0
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    other = parse_tokens(_tag(lab, "prespec/other-study/v1").message)
    _retag(lab, other)  # another spec's token
    out = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json").json()
    assert out["holds"] is False and any("imprint" in p for p in out["timestamp"]["problems"])
    # a genuine token for different content of this spec (another content hash)
    tag = _tag(lab)
    wrong = statement("mouse-diet", 1, "0" * 64, tag.commit)
    from registry.timestamp import ask_authority, make_request

    _retag(lab, [(tsa.url, ask_authority(tsa.url, make_request(wrong), wrong, timeout=5))])
    out = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json").json()
    assert out["holds"] is False and any("imprint" in p for p in out["timestamp"]["problems"])


def test_an_untrusted_authority_fails(lab, tsa, run, tmp_path):
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    stranger = make_authority("Unknown TSA").ca_pem(tmp_path / "stranger.pem")
    out = run("verify", "mouse-diet", lab.registry, "--trust", stranger, "--json").json()
    assert out["holds"] is False and any("does not verify" in p for p in out["timestamp"]["problems"])


def test_a_certificate_without_time_stamping_usage_fails(lab, run, tmp_path):
    plain = make_authority("Web server", stamping=False)
    server = Server(plain).start()
    try:
        assert run("register", "mouse-diet", lab.registry, "--tsa", server.url).status == 0
    finally:
        server.stop()
    out = run("verify", "mouse-diet", lab.registry, "--trust", plain.ca_pem(tmp_path / "web.pem"), "--json").json()
    assert out["holds"] is False and any("timeStamping" in p for p in out["timestamp"]["problems"])


def test_a_token_dated_after_the_start(lab, tsa, ca_pem, run):
    tsa.when = datetime(2099, 2, 1, tzinfo=timezone.utc)  # the authority's clock after the 2099-01-04 start
    before = (lab.registry / SPEC).read_bytes()
    refused = run("register", "mouse-diet", lab.registry, "--tsa", tsa.url)
    assert refused.status == 1 and "not before the start" in refused.err
    _unchanged(lab, before)
    tsa.when = None
    assert run("register", "mouse-diet", lab.registry).status == 0  # self-asserted; then a late token is attached
    tag = _tag(lab)
    text = statement("mouse-diet", 1, parse_block(tag.message)["content-sha256"], tag.commit)
    late = reply_for(make_request_der(text), tsa.authority, datetime(2099, 2, 1, tzinfo=timezone.utc), 7)
    _retag(lab, [("late", late)])
    out = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json").json()
    assert out["holds"] is False and out["timestamp"]["before_start"] is False


def make_request_der(text: bytes) -> bytes:
    from registry.timestamp import make_request

    return make_request(text).der


@pytest.mark.parametrize("mode, expected", [
    ("down", "cannot be reached"),
    ("slow", "did not answer within"),
    ("html", "text/html, not an RFC 3161 reply"),
    ("garbage", "not an RFC 3161 reply"),
])
def test_an_unusable_authority_leaves_nothing_behind(lab, tsa, run, mode, expected):
    before = (lab.registry / SPEC).read_bytes()
    url = closed_port_url() if mode == "down" else tsa.url
    tsa.mode, tsa.delay = mode, 1.5
    result = run("register", "mouse-diet", lab.registry, "--tsa", url, "--timeout", "0.3")
    assert result.status == 1 and expected in result.err and "no tag was made" in result.err
    assert "Traceback" not in result.err
    _unchanged(lab, before)


def test_offline_request_and_reply(lab, tsa, ca_pem, run, tmp_path):
    request = tmp_path / "mouse-diet.tsq"
    wrote = run("register", "mouse-diet", lab.registry, "--timestamp-request", request)
    assert wrote.status == 0 and request.is_file() and lab.repo.tags("prespec") == []
    again = run("register", "mouse-diet", lab.registry, "--timestamp-request", request)
    assert again.status == 1  # never overwrites a file
    reply = tmp_path / "mouse-diet.tsr"  # what the authority's portal returns for that request
    reply.write_bytes(reply_for(request.read_bytes(), tsa.authority, datetime.now(timezone.utc), 42))
    attached = run("register", "mouse-diet", lab.registry, "--timestamp-reply", reply)
    assert attached.status == 0, attached.err
    out = run("verify", "mouse-diet", lab.registry, "--trust", ca_pem, "--json").json()
    assert out["holds"] is True and out["timestamp"]["verified"] is True


def test_an_offline_reply_for_another_commit_is_refused(lab, tsa, run, tmp_path):
    request = tmp_path / "old.tsq"
    assert run("register", "mouse-diet", lab.registry, "--timestamp-request", request).status == 0
    lab.write(SPEC, spec_text(start=FUTURE, status="planned", analysis="Rank test."))
    lab.commit("changed after the request", "2020-01-12T10:00:00+01:00")
    reply = tmp_path / "old.tsr"
    reply.write_bytes(reply_for(request.read_bytes(), tsa.authority, datetime.now(timezone.utc), 43))
    result = run("register", "mouse-diet", lab.registry, "--timestamp-reply", reply)
    assert result.status == 1 and "imprint" in result.err and lab.repo.tags("prespec") == []


# ------------------------------------------------------------------ signed tags (SSH)


def _ssh_key(tmp_path, name):
    key = tmp_path / name
    subprocess.run(["ssh-keygen", "-q", "-t", "ed25519", "-N", "", "-C", name, "-f", str(key)], check=True)
    return key


@pytest.fixture
def ssh_lab(lab, tmp_path):
    if shutil.which("ssh-keygen") is None:
        pytest.skip("ssh-keygen is not installed")
    key = _ssh_key(tmp_path, "lab-key")
    with lab.repo._repo.config_writer() as config:
        config.set_value("gpg", "format", "ssh")
        config.set_value("user", "signingkey", str(key))
        config.set_value("tag", "gpgSign", "true")
    allowed = tmp_path / "allowed_signers"
    allowed.write_text(f"lead@lab.example {key.with_suffix('.pub').read_text()}", encoding="utf-8")
    return lab, allowed


def test_an_ssh_signed_tag_is_identity_evidence(ssh_lab, run, tmp_path):
    lab, allowed = ssh_lab
    made = run("register", "mouse-diet", lab.registry)
    assert made.status == 0 and "signed tag" in made.out
    out = run("verify", "mouse-diet", lab.registry, "--allowed-signers", allowed, "--json").json()
    assert out["holds"] is True
    assert out["signature"] == {"kind": "ssh", "verified": True, "signer": "lead@lab.example"}
    assert "signed by lead@lab.example" in out["evidence"]
    # a key the reviewer does not know: reported, not trusted
    other = _ssh_key(tmp_path, "someone-else")
    strangers = tmp_path / "strangers"
    strangers.write_text(f"lead@lab.example {other.with_suffix('.pub').read_text()}", encoding="utf-8")
    unknown = run("verify", "mouse-diet", lab.registry, "--allowed-signers", strangers, "--json").json()
    assert unknown["signature"]["verified"] is False and "signed by" not in unknown["evidence"]


def test_an_altered_signed_tag_fails(ssh_lab, run):
    lab, allowed = ssh_lab
    assert run("register", "mouse-diet", lab.registry).status == 0
    git = lab.repo._repo.git
    raw = git.cat_file("tag", "prespec/mouse-diet/v1")
    altered = raw.replace("start: 2099-01-04", "start: 2099-01-05")  # the signature stays, the text changes
    assert altered != raw
    sha = git.execute(["git", "mktag"], istream=subprocess.PIPE, as_process=True)
    out, _ = sha.proc.communicate((altered + "\n").encode())
    git.update_ref("refs/tags/prespec/mouse-diet/v1", out.decode().strip())
    result = run("verify", "mouse-diet", lab.registry, "--allowed-signers", allowed, "--json").json()
    assert result["holds"] is False and result["signature"]["verified"] is False
    assert any(p.startswith("signature:") for p in result["problems"])


def test_a_trust_file_that_is_no_certificate_is_a_usage_error(lab, tsa, run, tmp_path):
    assert run("register", "mouse-diet", lab.registry, "--tsa", tsa.url).status == 0
    bogus = tmp_path / "bogus.pem"
    bogus.write_text("not a certificate\n", encoding="utf-8")
    result = run("verify", "mouse-diet", lab.registry, "--trust", bogus)
    assert result.status == 2 and "holds no PEM certificate" in result.err
    missing = run("verify", "mouse-diet", lab.registry, "--trust", tmp_path / "absent.pem")
    assert missing.status == 2 and "cannot be read" in missing.err


def test_a_trust_file_outside_the_registry_is_refused(lab, tsa, run, tmp_path):
    (lab.root / ".prespec.yaml").write_text(f"timestamp:\n  authorities: [{tsa.url}]\n  trust: [../outside.pem]\n",
                                            encoding="utf-8")
    lab.commit("settings", "2020-01-10T11:00:00+01:00")
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 1 and "outside the registry folder" in result.err
