"""A self-signed certificate so a phone on the site Wi-Fi may use its microphone (browsers allow
recording only over https or on localhost). Made with the system's ``openssl`` command."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

from fieldtl.errors import InputError

VALID_DAYS = 90


def self_signed_certificate(folder: Path, *, host_name: str = "fieldtl") -> tuple[Path, Path]:
    """Certificate and key PEM files in ``folder``, made once and reused afterwards.

    Browsers show a warning for a self-signed certificate; the user accepts it once per device.
    Raises InputError when ``openssl`` is not installed or fails.
    """
    cert, key = folder / "fieldtl-cert.pem", folder / "fieldtl-key.pem"
    if cert.is_file() and key.is_file():
        return cert, key
    openssl = shutil.which("openssl")
    if openssl is None:
        raise InputError("https: the openssl command is not installed; install it or give --cert and --key")
    folder.mkdir(parents=True, exist_ok=True)
    completed = subprocess.run(
        [openssl, "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-sha256", "-days", str(VALID_DAYS),
         "-keyout", str(key), "-out", str(cert), "-subj", f"/CN={host_name}"],
        capture_output=True, text=True, check=False)
    if completed.returncode != 0:
        message = (completed.stderr.strip().splitlines() or ["unknown error"])[-1]
        raise InputError(f"https: openssl could not make a certificate ({message})")
    key.chmod(0o600)
    return cert, key
