"""A small HTTP server on 127.0.0.1 that answers byte-range requests (RFC 9110 Sect. 14), for tests of
remote rasters. Python's own http.server ignores the Range header, so GET with one range is added
here; every request is logged so tests can see the reads were ranged.
"""

from __future__ import annotations

import contextlib
import http.server
import os
import re
import threading
import time

_RANGE = re.compile(r"bytes=(\d*)-(\d*)$")


def make_handler(root, log: list, stall_s: float = 0.0):
    class Handler(http.server.BaseHTTPRequestHandler):
        protocol_version = "HTTP/1.1"

        def log_message(self, *args):  # quiet
            pass

        def _file(self):
            path = os.path.join(root, self.path.split("?")[0].lstrip("/"))
            return path if os.path.isfile(path) else None

        def _not_found(self):
            self.send_response(404)
            self.send_header("Content-Length", "0")
            self.end_headers()

        def do_HEAD(self):
            log.append(("HEAD", self.path, None))
            if stall_s:
                time.sleep(stall_s)
            p = self._file()
            if p is None:
                return self._not_found()
            self.send_response(200)
            self.send_header("Content-Length", str(os.path.getsize(p)))
            self.send_header("Accept-Ranges", "bytes")
            self.end_headers()

        def do_GET(self):
            rng = self.headers.get("Range")
            log.append(("GET", self.path, rng))
            if stall_s:
                time.sleep(stall_s)
            p = self._file()
            if p is None:
                return self._not_found()
            size = os.path.getsize(p)
            m = _RANGE.match(rng.strip()) if rng else None
            with open(p, "rb") as f:
                if m is None:
                    body = f.read()
                    self.send_response(200)
                else:
                    a, b = m.groups()
                    start = int(a) if a else max(size - int(b), 0)
                    end = min(int(b), size - 1) if (a and b) else size - 1
                    if start >= size:
                        self.send_response(416)
                        self.send_header("Content-Range", f"bytes */{size}")
                        self.send_header("Content-Length", "0")
                        self.end_headers()
                        return
                    f.seek(start)
                    body = f.read(end - start + 1)
                    self.send_response(206)
                    self.send_header("Content-Range", f"bytes {start}-{end}/{size}")
            self.send_header("Content-Length", str(len(body)))
            self.send_header("Accept-Ranges", "bytes")
            self.end_headers()
            self.wfile.write(body)

    return Handler


@contextlib.contextmanager
def serve(root, stall_s: float = 0.0):
    """Serve ``root`` on 127.0.0.1 (a free port) in a thread; yields (base URL, request log)."""
    log: list = []
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), make_handler(str(root), log, stall_s))
    server.daemon_threads = True
    t = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
    t.start()
    try:
        yield f"http://127.0.0.1:{server.server_address[1]}", log
    finally:
        server.shutdown()
        server.server_close()
