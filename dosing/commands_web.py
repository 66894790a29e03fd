"""``dosing serve`` (one site in a browser) and ``dosing accounts`` (its sign-ins).

The server owns the site's shift log (one SQLite file, WAL) and reads the
site's folder of scenarios. It binds to 127.0.0.1 unless told otherwise;
another address without a certificate is served, with a plain warning
that passwords and the log then cross the network readable.
Passwords are asked twice at the terminal and never taken on the command
line; from a pipe (a setup script) the first two lines are read.
"""

from __future__ import annotations

import sys

from .errors import InputError, UsageError

__all__ = ["add_parsers", "cmd_serve", "cmd_accounts", "DEFAULT_PORT"]

#: The port ``dosing serve`` listens on unless told otherwise (our own choice).
DEFAULT_PORT = 8470
_LOOPBACK = ("127.0.0.1", "::1", "localhost")


def add_parsers(sub) -> None:
    db_help = "the site's shift log (default: $DOSING_LOG_DB or the per-user data folder)"
    s = sub.add_parser("serve", help="serve a site's shift log and dose sheets in a browser")
    s.add_argument("scenarios", help="the site's folder of scenario files")
    s.add_argument("--db", metavar="PATH", help=db_help)
    s.add_argument("--host", default="127.0.0.1", help="address to listen on (default "
                   "127.0.0.1: this machine only)")
    s.add_argument("--port", type=int, default=DEFAULT_PORT,
                   help=f"port (default {DEFAULT_PORT})")
    s.add_argument("--cert", metavar="FILE.pem", help="TLS certificate (with --key): serve "
                   "https, cookies marked Secure")
    s.add_argument("--key", metavar="FILE.pem", help="TLS private key of --cert")
    s.add_argument("--name", default="", help="the site's name on every page (default: "
                   "the folder's name)")
    a = sub.add_parser("accounts", help="sign-in accounts of a site served by dosing serve")
    asub = a.add_subparsers(dest="accounts_command", required=True, metavar="ACTION")
    add = asub.add_parser("add", help="make an account (the password is asked twice)")
    add.add_argument("name")
    add.add_argument("--role", required=True, choices=("operator", "engineer", "viewer"))
    for action, text in (("password", "set a new password (asked twice); also lifts a "
                          "lock after failed sign-ins"),
                         ("disable", "stop an account signing in (its sessions end)"),
                         ("enable", "let a disabled account sign in again")):
        p = asub.add_parser(action, help=text)
        p.add_argument("name")
    asub.add_parser("list", help="list the accounts")
    for p in asub.choices.values():
        p.add_argument("--db", metavar="PATH", help=db_help)


def _password() -> str:
    """A new password, typed twice at the terminal, or two lines from a pipe."""
    import getpass
    if sys.stdin.isatty():
        first = getpass.getpass("new password: ")
        second = getpass.getpass("the same again: ")
    else:
        first, second = sys.stdin.readline().rstrip("\n"), sys.stdin.readline().rstrip("\n")
    if first != second:
        raise InputError("password", "the two entries differ; nothing was changed")
    return first


def cmd_accounts(args) -> int:
    from .io.site_log import SiteLog
    with SiteLog(args.db) as log:
        cmd = args.accounts_command
        if cmd == "list":
            for a in log.accounts():
                sys.stdout.write(f"{a.name:<20} {a.role:<9} "
                                 f"{'disabled' if a.disabled else 'active':<8} "
                                 f"since {a.created[:10]}\n")
            if not log.accounts():
                sys.stdout.write("no accounts yet: dosing accounts add NAME --role engineer\n")
            return 0
        if cmd == "add":
            if log.account(args.name) is not None:
                raise InputError("name", f"an account {args.name!r} already exists")
            log.add_account(args.name, args.role, _password())
            sys.stdout.write(f"account {args.name} ({args.role}) added to {log.path}\n")
        elif cmd == "password":
            if log.account(args.name) is None:
                raise InputError("name", f"no account {args.name!r} (dosing accounts list)")
            log.set_password(args.name, _password())
            sys.stdout.write(f"password of {args.name} set\n")
        else:
            log.set_disabled(args.name, cmd == "disable")
            sys.stdout.write(f"account {args.name} {cmd}d\n")
    return 0


def cmd_serve(args) -> int:
    import uvicorn
    from .web import Site, create_app
    if bool(args.cert) != bool(args.key):
        raise UsageError("--cert" if args.key else "--key", "give both --cert and --key "
                         "for TLS, or neither")
    if not 1 <= args.port <= 65535:
        raise UsageError("--port", f"{args.port}; allowed: 1 to 65535")
    site = Site(args.scenarios, args.db, secure=bool(args.cert), name=args.name)
    with site.log() as log:
        log_path = log.path
        if not log.accounts():
            sys.stderr.write("dosing: no accounts yet: make the first with `dosing accounts "
                             f"add NAME --role engineer --db {log.path}`\n")
    if args.host not in _LOOPBACK and not args.cert:
        sys.stderr.write(f"dosing: WARNING: serving on {args.host} without TLS: passwords "
                         "and the log cross the network readable by anyone on it. Give "
                         "--cert and --key, or put the server behind a TLS proxy.\n")
    scheme = "https" if args.cert else "http"
    sys.stderr.write(f"dosing: serving {site.folder} and the log {log_path} at "
                     f"{scheme}://{args.host}:{args.port}/ (Ctrl+C stops)\n")
    try:
        uvicorn.run(create_app(site), host=args.host, port=args.port, log_level="warning",
                    ssl_certfile=args.cert, ssl_keyfile=args.key, server_header=False,
                    proxy_headers=False)
    finally:
        site.close()
    return 0
