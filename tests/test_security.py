"""Access: TLS off loopback, client certificates, the bearer token.

Certificates are made here, per test module, with the ``cryptography`` package (a
throwaway CA that signs a server certificate for 127.0.0.1 and a client
certificate). Servers are real processes on 127.0.0.1.
"""

from __future__ import annotations

import datetime
import ipaddress
import subprocess
import sys

import grpc
import pytest

x509 = pytest.importorskip("cryptography.x509")
from cryptography.hazmat.primitives import hashes, serialization  # noqa: E402
from cryptography.hazmat.primitives.asymmetric import ec  # noqa: E402
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID  # noqa: E402

from etchguard.client import Client, ServiceError  # noqa: E402
from grpc_fixtures import DEMO_DECK, REPO, start_server  # noqa: E402

TOKEN = "lumen-farm-token-7f3a9c"


def _pem_key(key) -> bytes:
    return key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())


def _cert(subject: str, key, issuer_name, issuer_key, *, ca: bool, usage=None, ip: str | None = None):
    now = datetime.datetime.now(datetime.timezone.utc)
    b = (x509.CertificateBuilder()
         .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, subject)]))
         .issuer_name(issuer_name or x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, subject)]))
         .public_key(key.public_key()).serial_number(x509.random_serial_number())
         .not_valid_before(now - datetime.timedelta(minutes=5))
         .not_valid_after(now + datetime.timedelta(days=1))
         .add_extension(x509.BasicConstraints(ca=ca, path_length=None), critical=True))
    if usage is not None:
        b = b.add_extension(x509.ExtendedKeyUsage([usage]), critical=False)
    if ip is not None:
        b = b.add_extension(x509.SubjectAlternativeName([x509.IPAddress(ipaddress.ip_address(ip))]),
                            critical=False)
    return b.sign(issuer_key or key, hashes.SHA256())


@pytest.fixture(scope="module")
def pki(tmp_path_factory):
    """A CA, a server certificate for 127.0.0.1 and a client certificate, as PEM files."""
    d = tmp_path_factory.mktemp("pki")
    ca_key = ec.generate_private_key(ec.SECP256R1())
    ca = _cert("etchguard test CA", ca_key, None, None, ca=True)
    files = {}
    for name, usage, ip in (("server", ExtendedKeyUsageOID.SERVER_AUTH, "127.0.0.1"),
                            ("client", ExtendedKeyUsageOID.CLIENT_AUTH, None)):
        key = ec.generate_private_key(ec.SECP256R1())
        cert = _cert(f"etchguard test {name}", key, ca.subject, ca_key, ca=False, usage=usage, ip=ip)
        (d / f"{name}.key").write_bytes(_pem_key(key))
        (d / f"{name}.crt").write_bytes(cert.public_bytes(serialization.Encoding.PEM))
        files[name] = (d / f"{name}.crt", d / f"{name}.key")
    (d / "ca.crt").write_bytes(ca.public_bytes(serialization.Encoding.PEM))
    (d / "token").write_text(TOKEN + "\n")
    files["ca"] = d / "ca.crt"
    files["token"] = d / "token"
    return files


def _refused(call) -> ServiceError:
    with pytest.raises(ServiceError) as info:
        call()
    return info.value


def test_plaintext_beyond_loopback_is_refused_at_start():
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "0.0.0.0:0",
                           "--rules", str(DEMO_DECK)], capture_output=True, text=True, timeout=30,
                          cwd=REPO)
    assert proc.returncode == 2
    assert "0.0.0.0:0 needs TLS" in proc.stderr and "--tls-cert" in proc.stderr


def test_tls_and_token(pki):
    cert, key = pki["server"]
    server = start_server("--tls-cert", str(cert), "--tls-key", str(key),
                          "--token-file", str(pki["token"]), metrics=False)
    try:
        roots = pki["ca"].read_bytes()
        # plaintext against the TLS port: no connection, whatever the token
        with Client(server.address, timeout=5, token=TOKEN) as c:
            assert _refused(c.stats).code == grpc.StatusCode.UNAVAILABLE
        with Client(server.address, timeout=10, tls_roots=roots) as c:
            assert c.health() == "SERVING"  # health checks need no token
            error = _refused(c.stats)
            assert error.code == grpc.StatusCode.UNAUTHENTICATED
        with Client(server.address, timeout=10, tls_roots=roots, token="lumen-wrong-token-1b2c") as c:
            assert _refused(c.stats).code == grpc.StatusCode.UNAUTHENTICATED
            with c.session() as s:  # streams are guarded too
                assert _refused(lambda: s.check("n")).code == grpc.StatusCode.UNAUTHENTICATED
        with Client(server.address, timeout=10, tls_roots=roots, token=TOKEN) as c:
            assert c.stats().deck == "lumen-6m"
            with c.session() as s:
                assert _refused(lambda: s.check("no-such-net")).code == grpc.StatusCode.NOT_FOUND
    finally:
        server.stop()
    refusals = [e for e in server.logs if e.get("msg") == "unauthenticated call refused"]
    assert {e["reason"] for e in refusals} >= {"no authorization metadata", "wrong token"}
    assert all(e["method"] and e["peer"] for e in refusals)
    every_line = "\n".join(map(str, server.logs))
    assert "lumen-wrong-token-1b2c" not in every_line and TOKEN not in every_line


def test_client_certificates_when_required(pki):
    cert, key = pki["server"]
    server = start_server("--tls-cert", str(cert), "--tls-key", str(key),
                          "--tls-client-ca", str(pki["ca"]), metrics=False)
    try:
        roots = pki["ca"].read_bytes()
        with Client(server.address, timeout=5, tls_roots=roots) as c:
            assert _refused(c.stats).code == grpc.StatusCode.UNAVAILABLE  # no client certificate
        client_cert, client_key = pki["client"]
        with Client(server.address, timeout=10, tls_roots=roots, tls_client_cert=client_cert,
                    tls_client_key=client_key) as c:
            assert c.stats().deck == "lumen-6m"
    finally:
        server.stop()


def test_a_token_on_loopback_plaintext(pki):
    server = start_server("--token-file", str(pki["token"]), metrics=False)
    try:
        with Client(server.address, timeout=10) as c:
            assert _refused(c.stats).code == grpc.StatusCode.UNAUTHENTICATED
        with Client(server.address, timeout=10, token=TOKEN) as c:
            assert c.stats().deck == "lumen-6m"
    finally:
        server.stop()
