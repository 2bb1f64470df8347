"""``trueband addin``: write the LibreOffice Calc add-in (``trueband.oxt``) generated from the registry.

Full mode (the default): LibreOffice's own Python imports trueband from the environment this
command runs in (its site-packages folders are recorded in the add-in), so that Python must be
able to load this environment's numpy and scipy: the same Python version (3.11 here means
3.11 there). Thin mode (``--thin``): the add-in sends each call to a running ``trueband serve``
with the standard library only, for a LibreOffice whose Python cannot load them.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .common import EXIT_OK, CommandError


def register(sub) -> None:
    p = sub.add_parser(
        "addin", help="write the LibreOffice Calc add-in: trueband's functions live in Calc cells",
        description="Write trueband.oxt, a LibreOffice Calc extension that makes every trueband function a "
                    "live cell function (=SEM(B2; B3)), generated from the function registry. Install it with "
                    "the line printed, then restart LibreOffice.")
    p.add_argument("--out", default=".", metavar="DIR", help="folder to write trueband.oxt into (default: here)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing trueband.oxt")
    p.add_argument("--thin", action="store_true",
                   help="call a running `trueband serve` over HTTP instead of importing trueband in LibreOffice")
    p.add_argument("--url", default="http://127.0.0.1:8765",
                   help="with --thin, the server's address on this computer (default: %(default)s); an access token, "
                        "where the server needs one, is read from TRUEBAND_TOKEN in LibreOffice's environment")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..addin.extension import install_line, libreoffice_python, python_version_note, write_extension

    folder = Path(args.out)
    if not folder.is_dir():
        raise CommandError(f"the folder {folder} does not exist")
    out = folder / "trueband.oxt"
    if out.exists() and not args.overwrite:
        raise CommandError(f"{out} already exists; add --overwrite to replace it")
    if args.url != "http://127.0.0.1:8765" and not args.thin:
        raise CommandError("--url is for --thin")
    mode = "thin" if args.thin else "full"
    try:
        write_extension(out, mode=mode, server_url=args.url)
    except ValueError as exc:  # a thin-mode address that is not this computer's loopback
        raise CommandError(str(exc)) from None
    except OSError as exc:
        raise CommandError(f"cannot write {out}: {exc.strerror or exc}") from None
    print(f"wrote {out} ({mode} mode)")
    print(f"install:   {install_line(out)}   (then restart LibreOffice)")
    print('uninstall: unopkg remove trueband.calc.addin')
    if mode == "full":
        print(python_version_note())
        found = libreoffice_python()
        ours = "%d.%d" % sys.version_info[:2]
        if found is None:
            print("warning: no LibreOffice Python found here (on Linux: is python3-uno installed?); the add-in "
                  "needs one of Python " + ours, file=sys.stderr)
        elif found[1] != ours:
            print(f"warning: LibreOffice's Python ({found[0]}) is {found[1]}, this one is {ours}: it cannot load "
                  f"this environment's numpy, so the cells would show #NAME?. Run trueband addin from a Python "
                  f"{found[1]} environment, or use --thin", file=sys.stderr)
    else:
        print(f"the cells call {args.url}: keep `trueband serve` running while you work")
    print("In a cell: =SEM(B2; B3). The figures are statistical indicators to support professional judgment, "
          "not legal findings.")
    return EXIT_OK
