"""`fieldtl app`: the checks before the field app starts, then the Streamlit server in this process's place."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from fieldtl.addresses import reachable_addresses
from fieldtl.cautions import CAUTIONS
from fieldtl.errors import InputError


def add_app_command(sub: argparse._SubParsersAction) -> None:
    """The parser of `fieldtl app`."""
    app = sub.add_parser("app", help="start the field app (opens the invented demo project on first start)")
    app.add_argument("--host", default="127.0.0.1",
                     help="address to serve on (default 127.0.0.1; use 0.0.0.0 for a phone on the site Wi-Fi)")
    app.add_argument("--port", type=int, default=8501)
    app.add_argument("--data-dir", type=Path, help="folder for the project store (default: your user data folder)")
    app.add_argument("--access-code", help="code asked of every browser, at least 40 bits (e.g. k7m2-q9tx-4hvw); "
                                           "also read from FIELDTL_ACCESS_CODE (default when served beyond this "
                                           "machine: a new random code, printed here)")
    app.add_argument("--cert", type=Path, help="TLS certificate (PEM); phones only allow recording over https")
    app.add_argument("--key", type=Path, help="TLS private key (PEM) for --cert")
    app.add_argument("--store", help="team server: postgresql://user@host/database (also FIELDTL_STORE_URL; "
                                     "default: the SQLite store in --data-dir)")
    app.add_argument("--https", action="store_true",
                     help="serve over https with a self-signed certificate kept in the data folder")
    app.set_defaults(run=run_app)


LOCAL_HOSTS = ("127.0.0.1", "localhost", "::1")
NO_WARMUP_VAR = "FIELDTL_NO_WARMUP"     # set: the server measures every take itself (as before the warm-up)


def run_app(args: argparse.Namespace) -> int:
    from fieldtl.store import default_data_dir
    from fieldtl.ui import access

    if (args.cert is None) != (args.key is None):
        raise InputError("app: give both --cert and --key, or neither")
    if args.https and args.cert is not None:
        raise InputError("app: --https makes its own certificate; leave out --cert and --key")
    for path in (args.cert, args.key):
        if path is not None and not path.is_file():
            raise InputError(f"{path.name}: file not found ({path})")
    chosen = args.access_code if args.access_code is not None else os.environ.get(access.ENV_VAR) or None
    if chosen is not None:
        access.check_chosen_code(chosen, source="--access-code" if args.access_code is not None else access.ENV_VAR)
    data_dir = (args.data_dir or default_data_dir()).expanduser().resolve()
    data_dir.mkdir(parents=True, exist_ok=True)
    if args.https:
        from fieldtl.tls import self_signed_certificate
        args.cert, args.key = self_signed_certificate(data_dir / "tls")
        print("https with a self-signed certificate: each browser asks once whether to trust it")
    env = {k: v for k, v in os.environ.items() if k != access.ENV_VAR}
    env["FIELDTL_DATA_DIR"] = str(data_dir)
    from fieldtl.store.location import STORE_URL_VARIABLE, check_store_url
    if args.store is not None:          # the team server (fieldtl.store.location): audio in its database
        check_store_url(args.store, "--store")
        env[STORE_URL_VARIABLE] = args.store
    server = env.get(STORE_URL_VARIABLE, "").strip()
    # On a team server accounts sign in (ui/login.py) and no access code is asked.
    code = None if server else chosen or (access.new_code() if args.host not in LOCAL_HOSTS else None)
    if code is not None:
        env[access.ENV_VAR] = code
        print(f"Access code for every browser: {code}  (spaces, dashes and capitals do not matter)")
    app_path = Path(__file__).resolve().parent / "ui" / "app.py"
    root = app_path.parents[2]          # the repository, whose .streamlit/config.toml sets upload limits
    command = [sys.executable, "-m", "fieldtl.ui.boot", "run", str(app_path), "--server.address", args.host,
               "--server.port", str(args.port), "--server.headless", "true", "--browser.gatherUsageStats", "false"]
    if args.cert is not None:
        command += ["--server.sslCertFile", str(args.cert.resolve()), "--server.sslKeyFile", str(args.key.resolve())]
    scheme = "https" if args.cert else "http"
    urls = ", ".join(f"{scheme}://{a}:{args.port}" for a in reachable_addresses(args.host))   # never 0.0.0.0
    if server:
        from fieldtl.store.pg_database import shown_url
        print(f"fieldtl app on {urls}  (team server {shown_url(server)}, data folder {data_dir}); Ctrl+C stops it")
    else:
        print(f"fieldtl app on {urls}  (store: {data_dir}); Ctrl+C stops it")
    print(f"CAUTION: {CAUTIONS[0]}\nCAUTION: {CAUTIONS[1]}")
    sys.stdout.flush()
    sys.stderr.flush()
    if not server and not os.environ.get(NO_WARMUP_VAR):
        # A child measures the store's takes (and imports the demo on a first start) while the server
        # boots; the server reads its reports and reaps it (fieldtl.warmup).
        from fieldtl import warmup
        from fieldtl.store.connection import DATABASE_NAME

        watch = warmup.start(data_dir / DATABASE_NAME)
        if watch is not None:
            env[warmup.ENV_VAR] = watch
    if (root / ".streamlit" / "config.toml").is_file():
        os.chdir(root)
    # The server replaces this process: SIGTERM and SIGINT reach it directly and no child is left behind.
    os.execve(sys.executable, command, env)
