"""A throwaway time-stamping authority for the tests: its own CA, a TSA certificate and an HTTP
responder on 127.0.0.1 answering real RFC 3161 requests (RFC 3161 sections 2.4.2 and 3.4; CMS
SignedData per RFC 5652; the ESS signing-certificate-v2 attribute per RFC 5035).

The replies are built with asn1crypto and signed with cryptography; nothing here is hand-written DER.
"""

from __future__ import annotations

import hashlib
import http.server
import socket
import threading
import time
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from pathlib import Path

from asn1crypto import algos, cms, core, tsp
from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID


@dataclass
class Authority:
    """A CA and one certificate it issued for signing tokens."""

    ca_cert: x509.Certificate
    cert: x509.Certificate
    key: ec.EllipticCurvePrivateKey

    def ca_pem(self, path: Path) -> Path:
        path.write_bytes(self.ca_cert.public_bytes(serialization.Encoding.PEM))
        return path


def _name(common: str) -> x509.Name:
    return x509.Name([x509.NameAttribute(NameOID.ORGANIZATION_NAME, "Test Time Authority"),
                      x509.NameAttribute(NameOID.COMMON_NAME, common)])


def make_authority(common: str = "Test TSA", *, stamping: bool = True) -> Authority:
    """A self-signed CA and a TSA certificate (critical EKU timeStamping, RFC 3161 section 2.3;
    with ``stamping=False`` an ordinary server-authentication certificate instead)."""
    now = datetime.now(timezone.utc) - timedelta(days=1)
    ca_key = ec.generate_private_key(ec.SECP256R1())
    ca_cert = (x509.CertificateBuilder().subject_name(_name(common + " CA")).issuer_name(_name(common + " CA"))
               .public_key(ca_key.public_key()).serial_number(x509.random_serial_number())
               .not_valid_before(now - timedelta(days=3650)).not_valid_after(now + timedelta(days=3650))
               .add_extension(x509.BasicConstraints(ca=True, path_length=None), critical=True)
               .add_extension(x509.KeyUsage(digital_signature=False, content_commitment=False, key_encipherment=False,
                                            data_encipherment=False, key_agreement=False, key_cert_sign=True,
                                            crl_sign=True, encipher_only=False, decipher_only=False), critical=True)
               .sign(ca_key, hashes.SHA256()))
    key = ec.generate_private_key(ec.SECP256R1())
    usage = [ExtendedKeyUsageOID.TIME_STAMPING] if stamping else [ExtendedKeyUsageOID.SERVER_AUTH]
    cert = (x509.CertificateBuilder().subject_name(_name(common)).issuer_name(ca_cert.subject)
            .public_key(key.public_key()).serial_number(x509.random_serial_number())
            .not_valid_before(now - timedelta(days=3650)).not_valid_after(now + timedelta(days=3650))
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=True, key_encipherment=False,
                                         data_encipherment=False, key_agreement=False, key_cert_sign=False,
                                         crl_sign=False, encipher_only=False, decipher_only=False), critical=True)
            .add_extension(x509.ExtendedKeyUsage(usage), critical=True)
            .sign(ca_key, hashes.SHA256()))
    return Authority(ca_cert, cert, key)


def reply_for(request_der: bytes, authority: Authority, when: datetime, serial: int) -> bytes:
    """A granted TimeStampResp for a TimeStampReq, signed by ``authority`` with time ``when``."""
    request = tsp.TimeStampReq.load(request_der)
    info = tsp.TSTInfo({
        "version": "v1", "policy": "1.3.6.1.4.1.55555.1.1", "message_imprint": request["message_imprint"],
        "serial_number": serial, "gen_time": when.astimezone(timezone.utc),
        "accuracy": {"seconds": 1}, "ordering": False,
        "nonce": request["nonce"].native if request["nonce"].native is not None else None,
    })
    if request["nonce"].native is None:
        del info["nonce"]
    content = info.dump()
    cert_der = authority.cert.public_bytes(serialization.Encoding.DER)
    cert = asn1_x509.Certificate.load(cert_der)
    attrs = cms.CMSAttributes([
        cms.CMSAttribute({"type": "content_type", "values": ["tst_info"]}),
        cms.CMSAttribute({"type": "message_digest", "values": [hashlib.sha256(content).digest()]}),
        cms.CMSAttribute({"type": "signing_time", "values": [cms.Time(  # UTCTime only up to 2049 (RFC 5280 4.1.2.5)
            {"utc_time" if when.year < 2050 else "generalized_time": when.astimezone(timezone.utc)})]}),
        cms.CMSAttribute({"type": "signing_certificate_v2", "values": [tsp.SigningCertificateV2({
            "certs": [tsp.ESSCertIDv2({"hash_algorithm": {"algorithm": "sha256"},
                                       "cert_hash": hashlib.sha256(cert_der).digest()})]})]}),
    ])
    signature = authority.key.sign(attrs.dump(), ec.ECDSA(hashes.SHA256()))
    signer = cms.SignerInfo({
        "version": "v1",
        "sid": cms.SignerIdentifier({"issuer_and_serial_number": cms.IssuerAndSerialNumber(
            {"issuer": cert.issuer, "serial_number": cert.serial_number})}),
        "digest_algorithm": algos.DigestAlgorithm({"algorithm": "sha256"}),
        "signed_attrs": attrs,
        "signature_algorithm": algos.SignedDigestAlgorithm({"algorithm": "sha256_ecdsa"}),
        "signature": signature,
    })
    signed = cms.SignedData({
        "version": "v3", "digest_algorithms": [algos.DigestAlgorithm({"algorithm": "sha256"})],
        "encap_content_info": {"content_type": "tst_info", "content": core.ParsableOctetString(content)},
        "certificates": [cert], "signer_infos": [signer],
    })
    token = cms.ContentInfo({"content_type": "signed_data", "content": signed})
    return tsp.TimeStampResp({"status": {"status": "granted"}, "time_stamp_token": token}).dump()


@dataclass
class Server:
    """The authority over HTTP on 127.0.0.1; ``mode`` is good, html, slow or garbage."""

    authority: Authority
    mode: str = "good"
    when: datetime | None = None
    delay: float = 2.0
    requests: list[bytes] = field(default_factory=list)
    url: str = ""
    _httpd: http.server.ThreadingHTTPServer | None = None

    def start(self) -> "Server":
        server = self

        class Handler(http.server.BaseHTTPRequestHandler):
            def log_message(self, *args: object) -> None:
                pass

            def do_POST(self) -> None:  # noqa: N802 - http.server's name
                body = self.rfile.read(int(self.headers.get("Content-Length") or 0))
                server.requests.append(body)
                if server.mode == "slow":
                    time.sleep(server.delay)
                if server.mode == "html":
                    payload, kind = b"<html><body>Welcome to our portal</body></html>", "text/html"
                elif server.mode == "garbage":
                    payload, kind = b"\x30\x03\x02\x01", "application/timestamp-reply"
                else:
                    payload = reply_for(body, server.authority, server.when or datetime.now(timezone.utc),
                                        len(server.requests))
                    kind = "application/timestamp-reply"
                try:
                    self.send_response(200)
                    self.send_header("Content-Type", kind)
                    self.send_header("Content-Length", str(len(payload)))
                    self.end_headers()
                    self.wfile.write(payload)
                except OSError:
                    pass  # the client gave up (the timeout test)

        self._httpd = http.server.ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self._httpd.daemon_threads = True
        self.url = f"http://127.0.0.1:{self._httpd.server_address[1]}/tsa"
        threading.Thread(target=self._httpd.serve_forever, daemon=True).start()
        return self

    def stop(self) -> None:
        if self._httpd is not None:
            self._httpd.shutdown()
            self._httpd.server_close()


def closed_port_url() -> str:
    """An address on 127.0.0.1 where nothing listens (the authority is down)."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    return f"http://127.0.0.1:{port}/tsa"
