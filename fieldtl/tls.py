"""A self-signed certificate so a phone on the site Wi-Fi may use its microphone (browsers allow
recording only over https or on localhost). Made with the system's ``openssl`` command, and made
again at start when it is missing, unreadable or expires within ``RENEW_DAYS``."""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

from fieldtl.errors import InputError

VALID_DAYS = 90
RENEW_DAYS = 30          # a server started in the last 30 days of a certificate gets a new one


def self_signed_certificate(folder: Path, *, host_name: str = "fieldtl",
                            valid_days: int = VALID_DAYS) -> tuple[Path, Path]:
    """Certificate and key PEM files in ``folder``, made once and reused until close to expiry.

    Browsers show a warning for a self-signed certificate; the user accepts it once per device
    (and again after a renewal). Raises InputError when ``openssl`` is not installed or fails.
    """
    cert, key = folder / "fieldtl-cert.pem", folder / "fieldtl-key.pem"
    openssl = shutil.which("openssl")
    if openssl is None:
        if cert.is_file() and key.is_file():
            return cert, key           # cannot check the date without openssl; the browser will tell
        raise InputError("https: the openssl command is not installed; install it or give --cert and --key")
    if cert.is_file() and key.is_file() and not _expires_within(openssl, cert, days=RENEW_DAYS):
        return cert, key
    folder.mkdir(parents=True, exist_ok=True)
    new_cert, new_key = folder / ".fieldtl-cert.pem.new", folder / ".fieldtl-key.pem.new"
    completed = subprocess.run(
        [openssl, "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-sha256", "-days", str(valid_days),
         "-keyout", str(new_key), "-out", str(new_cert), "-subj", f"/CN={host_name}"],
        capture_output=True, text=True, check=False)
    if completed.returncode != 0:
        message = (completed.stderr.strip().splitlines() or ["unknown error"])[-1]
        raise InputError(f"https: openssl could not make a certificate ({message})")
    new_key.chmod(0o600)
    os.replace(new_key, key)          # the old pair stays usable until both new files are in place
    os.replace(new_cert, cert)
    return cert, key


def _expires_within(openssl: str, cert: Path, *, days: int) -> bool:
    """True when the certificate ends within ``days`` (or cannot be read): ``openssl x509 -checkend``."""
    completed = subprocess.run([openssl, "x509", "-checkend", str(days * 86_400), "-noout", "-in", str(cert)],
                               capture_output=True, text=True, check=False)
    return completed.returncode != 0
