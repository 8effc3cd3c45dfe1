"""The self-signed certificate for https on the site Wi-Fi."""

import shutil
import ssl

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
