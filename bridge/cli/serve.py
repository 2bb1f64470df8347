"""``trueband serve``: the local HTTP bridge under waitress (never Flask's development server).

Loopback only by default. Binding to any other address refuses to start
unless an access token is set (``--token`` or the ``TRUEBAND_TOKEN``
environment variable); with a token every request must carry
``Authorization: Bearer TOKEN``. Ctrl-C (or a terminate/Ctrl-Break signal)
stops the server cleanly.
"""

from __future__ import annotations

import os
import signal

from .common import EXIT_OK, CommandError
from ..http.server import DEFAULT_HOST, DEFAULT_PORT, is_loopback, make_server, url_host

TOKEN_VARIABLE = "TRUEBAND_TOKEN"


def _stop(signum, frame):  # terminate and Ctrl-Break end the server the way Ctrl-C does
    raise KeyboardInterrupt


def _serve(args) -> int:
    from trueband.funcs.registry import REGISTRY

    from ..http import create_app
    from ..http.guards import check_token

    token = args.token or os.environ.get(TOKEN_VARIABLE) or None
    try:
        check_token(token)
    except ValueError as exc:  # e.g. a trailing space copied with it: no request could ever match
        raise CommandError(f"{exc}; set {TOKEN_VARIABLE} (or --token) to a token without spaces") from None
    if not is_loopback(args.host) and not token:
        raise CommandError(
            f"refusing to listen on {args.host}, which is not a loopback address, without an access token; "
            f"set {TOKEN_VARIABLE} (or --token) so that every request must carry it")
    if not 0 <= args.port <= 65535:
        raise CommandError(f"--port must be between 0 and 65535, got {args.port}")
    app = create_app({"HOST": args.host.strip("[]"), "TOKEN": token,
                      "ALLOWED_ORIGINS": args.allow_origin, "ALLOWED_HOSTS_EXTRA": args.allow_host})
    try:
        server = make_server(app, args.host, args.port)
    except OSError as exc:
        raise CommandError(f"cannot listen on {args.host} port {args.port}: {exc.strerror or exc}") from None

    base = f"http://{url_host(args.host)}:{server.effective_port}"
    example = "SEM" if "SEM" in REGISTRY else next(iter(sorted(REGISTRY)), None)
    print(f"trueband bridge: {len(REGISTRY)} functions at {base}/v1/ (Ctrl-C stops it)", flush=True)
    if example:
        args_text = "&".join(f"{a.name}=..." for a in REGISTRY[example].arguments if a.required)
        if example == "SEM":
            args_text = "sd=15&reliability=0.91"
        print(f"  try: {base}/v1/text/{example}?{args_text}", flush=True)
    print(f"  API description: {base}/v1/openapi.json", flush=True)
    if token:
        print("  every request must carry Authorization: Bearer <your token>", flush=True)
        if args.token:
            print(f"  note: a token on the command line is visible to other local users; prefer {TOKEN_VARIABLE}",
                  flush=True)

    previous = {}
    # SIGINT too: a shell that starts the server in the background leaves it ignored otherwise.
    for name in ("SIGINT", "SIGTERM", "SIGBREAK"):  # SIGBREAK is Windows' Ctrl-Break
        if hasattr(signal, name):
            previous[name] = signal.signal(getattr(signal, name), _stop)
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    finally:
        server.close()
        for name, handler in previous.items():
            signal.signal(getattr(signal, name), handler)
    print("trueband bridge: stopped", flush=True)
    return EXIT_OK


def register(sub) -> None:
    p = sub.add_parser(
        "serve", help="run the local HTTP bridge (every function over HTTP)",
        description="Serve every registered function over HTTP (JSON under /v1, plain text under /v1/text "
                    "for spreadsheet formulas). Listens on loopback only unless told otherwise; a "
                    f"non-loopback address needs an access token ({TOKEN_VARIABLE} or --token).")
    p.add_argument("--host", default=DEFAULT_HOST, help=f"address to listen on (default {DEFAULT_HOST})")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"port (default {DEFAULT_PORT}; 0 picks a free one)")
    p.add_argument("--token", help=f"access token every request must carry (default: ${TOKEN_VARIABLE})")
    p.add_argument("--allow-origin", action="append", default=[], metavar="ORIGIN",
                   help="a web origin (e.g. https://intranet.example) that may call the bridge from a "
                        "browser (CORS); repeatable; none by default")
    p.add_argument("--allow-host", action="append", default=[], metavar="NAME",
                   help="another Host name to answer to, besides loopback names and the bound address "
                        "(e.g. the machine's name when listening on 0.0.0.0); repeatable")
    p.set_defaults(handler=_serve)

