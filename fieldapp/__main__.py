"""``python -m fieldapp``: the command line (fieldapp.cli, on click).

``cmd_serve`` starts the web app for ``fieldapp serve`` (its options are
declared in fieldapp/cli/data.py).
"""
from __future__ import annotations

import sys

from .cli import main
from .science import InputError


def _data_dir(a):
    from . import default_data_dir
    return a.data or str(default_data_dir())


def cmd_serve(a) -> int:
    import waitress
    from . import create_app, store
    from .web.pairing import start_lan
    from .web.security import binds_to_network
    bind = a.host or ("0.0.0.0" if a.lan else "127.0.0.1")
    lan = a.lan or binds_to_network(bind)      # never on the network without pairing
    try:
        db = getattr(a, "db", None)
        app = create_app({"DATA_DIR": _data_dir(a), "CALIBRATION_MAX_AGE_DAYS": a.check_days,
                          "PAIRING_IDLE_DAYS": a.pairing_idle_days,
                          "LAN": lan, **({"DB": db, "POOL_SIZE": a.threads + 4} if db else {})})
    except store.StoreError as e:
        raise InputError(e.message, "data") from None
    if app.config.get("LOG_READ_ONLY"):
        print(f"fieldapp: READ-ONLY. {app.config['LOG_READ_ONLY']}", flush=True)
    elif a.demo:
        from . import demo       # converts its readings: numpy, only when asked for
        conn = store.connect(app.config["DATABASE"])
        try:
            n = demo.load(conn)
        finally:
            conn.close()
        print(f"Demo scenario loaded ({n} new readings; invented data).", flush=True)
    where = app.config["DATABASE"]
    if app.config.get("DB_DIALECT") == "postgresql":
        from .store.pg import redact
        where = f"{redact(where)} (PostgreSQL)"
    print(f"fieldapp {__import__('fieldapp').__version__}: log in {where}", flush=True)
    https = None
    if lan and a.https_port:     # --- https for tablets: one call into fieldapp/tls.py ---
        from . import tls
        https = tls.start_https(app, bind, a.https_port, _data_dir(a), a.tls_name)
    if lan:
        print("\n".join(start_lan(app, bind, a.port)), flush=True)
    print(f"Open http://localhost:{a.port}/ in a browser on this machine (Ctrl+C stops).",
          flush=True)
    from .web import connections
    server = waitress.create_server(
        app, host=bind, port=a.port, threads=a.threads, ident="fieldapp",
        max_request_body_size=app.config["MAX_CONTENT_LENGTH"],
        _dispatcher=(connections.writes_first_dispatcher(a.threads)
                     if a.dispatch == "writes-first" else None),
        **connections.waitress_options(idle_timeout_s=a.idle_timeout))
    connections.guard(server)        # the laptop always gets a slot; caps per address
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    finally:
        if https is not None:
            https.stop()
    return 0


if __name__ == "__main__":
    sys.exit(main())
