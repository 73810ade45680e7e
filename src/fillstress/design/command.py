"""``fillstress design site.toml``: open the site, serve its page on loopback, open the
browser, and stop cleanly on Ctrl-C."""
from __future__ import annotations

import signal
import threading
import webbrowser

from .server import DesignServer
from .state import DesignSession


def design_site_file(path, *, browser: bool = True, depth: float | None = None,
                     ratio_limit: float | None = None, stress_limit: float | None = None,
                     announce=print, ready: threading.Event | None = None) -> None:
    """Serve the design page of site file `path` until interrupted (Ctrl-C).

    `announce` receives the lines to print (the address with its token); `ready`, when
    given, is set once the server listens (for tests that run it in a thread)."""
    session = DesignSession(path, depth=depth, ratio_limit=ratio_limit,
                            stress_limit=stress_limit)     # a bad site file fails here, before serving
    server = DesignServer(session)
    announce([f"design page of {session.layout.site.name}: {server.url}",
              "only this machine can reach it, and only with that address (it holds a "
              "one-time token); press Ctrl-C to stop"])
    if browser:
        webbrowser.open(server.url)
    if ready is not None:
        ready.set()
    in_main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, _interrupt) if in_main else None
    try:
        server.serve_forever(poll_interval=0.2)
    except KeyboardInterrupt:
        announce(["design page stopped"])
    finally:
        server.server_close()
        if in_main:
            signal.signal(signal.SIGTERM, previous)


def _interrupt(signum, frame):
    """SIGTERM (a closed terminal, a service manager) stops the page as Ctrl-C does."""
    raise KeyboardInterrupt
