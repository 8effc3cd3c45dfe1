"""The self-signed certificate for https on the site Wi-Fi."""

import shutil
import ssl
import subprocess
from datetime import datetime, timezone

import pytest

from fieldtl.errors import InputError
from fieldtl.tls import self_signed_certificate


@pytest.mark.skipif(shutil.which("openssl") is None, reason="the openssl command is not installed")
def test_certificate_is_made_once_and_loads_as_a_tls_pair(tmp_path):
    cert, key = self_signed_certificate(tmp_path / "tls")
    context = ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER)
    context.load_cert_chain(cert, key)             # Python's ssl module accepts the pair (RFC 5280 PEM)
    assert (key.stat().st_mode & 0o777) == 0o600
    before = cert.read_bytes()
    assert self_signed_certificate(tmp_path / "tls") == (cert, key) and cert.read_bytes() == before


def test_missing_openssl_is_one_line(tmp_path, monkeypatch):
    monkeypatch.setattr(shutil, "which", lambda name: None)
    with pytest.raises(InputError, match="^https: the openssl command is not installed"):
        self_signed_certificate(tmp_path / "tls")


def _end_date(cert):
    """notAfter as the system openssl reads it (outside the code under test)."""
    out = subprocess.run(["openssl", "x509", "-enddate", "-noout", "-in", str(cert)], capture_output=True,
                         text=True, check=True).stdout.strip()
    return datetime.strptime(out.removeprefix("notAfter="), "%b %d %H:%M:%S %Y %Z").replace(tzinfo=timezone.utc)


@pytest.mark.skipif(shutil.which("openssl") is None, reason="the openssl command is not installed")
@pytest.mark.parametrize("days_left, renewed", [(29, True), (31, False)])   # renewal 30 days before the end
def test_a_certificate_close_to_its_end_is_made_again(tmp_path, days_left, renewed):
    cert, key = self_signed_certificate(tmp_path / "tls", valid_days=days_left)
    before = (cert.read_bytes(), key.read_bytes())
    assert self_signed_certificate(tmp_path / "tls") == (cert, key)
    assert ((cert.read_bytes(), key.read_bytes()) != before) is renewed
    days = (_end_date(cert) - datetime.now(timezone.utc)).days
    assert days in ((89, 90) if renewed else (30, 31))
    context = ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER)
    context.load_cert_chain(cert, key)                     # the new certificate matches the new key


@pytest.mark.skipif(shutil.which("openssl") is None, reason="the openssl command is not installed")
def test_an_unreadable_certificate_is_made_again(tmp_path):
    cert, key = self_signed_certificate(tmp_path / "tls")
    cert.write_text("not a certificate")
    self_signed_certificate(tmp_path / "tls")
    ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER).load_cert_chain(cert, key)
    assert not list((tmp_path / "tls").glob(".*.new"))
