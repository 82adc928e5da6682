"""``speciakin web [ROOT]``: the local browser workbench on the campaign folders under ROOT."""

from __future__ import annotations

NAME = "web"
HELP = "open the workbench page in a browser (local server on 127.0.0.1)"


def add_arguments(parser) -> None:
    parser.add_argument("root", metavar="CAMPAIGN_ROOT", nargs="?", default=".",
                        help="folder holding the campaign folders (default: the current folder); "
                             "the page reads and writes only inside it")
    parser.add_argument("--port", type=int, default=8765, help="port (default 8765; 0 picks a free one)")
    parser.add_argument("--host", default="127.0.0.1",
                        help="address to listen on (default 127.0.0.1; any other needs --require-token)")
    parser.add_argument("--require-token", action="store_true",
                        help="print a random token at start; requests without it get 403")
    parser.add_argument("--scheduler", metavar="ADDRESS", default=None,
                        help="run the page's jobs on an existing Dask distributed scheduler (as for 'sample'); "
                             "default: a local cluster started at the first job")
    parser.add_argument("--in-process", action="store_true",
                        help="run jobs in threads of the server process instead of a Dask cluster")
    parser.add_argument("--no-browser", action="store_true", help="do not open a browser window")
    parser.epilog = ("example:\n  speciakin web ~/campaigns\n"
                     "  speciakin web ~/campaigns --host 0.0.0.0 --require-token   # reachable by colleagues")


def run(args) -> int:
    import webbrowser

    try:
        from speciakin.web import create_app, make_server, new_token
    except ImportError as exc:
        from speciakin.errors import InputError, Location

        raise InputError("the workbench page needs the 'web' extra", Location(key="web"), exc.name,
                         "pip install 'speciakin[web]' (dash, dash-ag-grid, plotly)") from None

    import speciakin.data.importer  # noqa: F401  (loaded once before the first page asks)
    import speciakin.pipeline  # noqa: F401

    token = new_token() if args.require_token else None
    if args.in_process:
        board = None
    else:
        from speciakin.web.dask_jobs import DaskJobBoard

        board = DaskJobBoard(args.scheduler)
    app, state = create_app(args.root, token=token, board=board)
    server = make_server(app, args.host, args.port, token=token)
    url = f"http://{'127.0.0.1' if args.host in ('0.0.0.0', '::') else args.host}:{server.server_port}/"
    if token:
        url += f"?token={token}"
    print(f"speciakin workbench on {url}  (campaign root {state.root}); Ctrl-C stops it", flush=True)
    if token:
        print(f"token: {token}  (give it only to the people who may use this page)", flush=True)
    if not args.no_browser:
        webbrowser.open(url)
    try:
        server.serve_forever()
    finally:
        state.board.shutdown()
    return 0
