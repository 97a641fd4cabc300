"""A loopback HTTP file server with byte ranges (RFC 7233) that counts what it sends; for tests only.

Run as ``python range_server.py FOLDER``: it listens on 127.0.0.1 on a free port, prints the port
on one line, and serves the files of FOLDER until it is stopped (or its standard input closes).
Any URL path is served by its last component, so the same file can be fetched under several URLs
(GDAL caches by URL). ``GET /__stats__`` answers ``BYTES REQUESTS`` (body bytes of files sent and
file requests answered since the last ``GET /__reset__``).

It runs as its own process, not as a thread of the test: a GDAL call that holds Python's GIL
while it waits for the server (pyogrio opening a layer) would otherwise wait for ever.
The standard library's ``SimpleHTTPRequestHandler`` ignores ``Range`` headers, hence this handler.
"""

from __future__ import annotations

import http.server
import os
import re
import sys
import threading

STATS = {"bytes": 0, "requests": 0}
LOCK = threading.Lock()


class RangeHandler(http.server.SimpleHTTPRequestHandler):
    """Serve files with HTTP byte ranges and count the body bytes sent."""

    def log_message(self, *args):  # quiet
        pass

    def translate_path(self, path):
        return os.path.join(self.directory, os.path.basename(path.split("?", 1)[0]))

    def _answer(self, text: str) -> None:
        body = text.encode()
        self.send_response(200)
        self.send_header("Content-Length", str(len(body)))
        self.end_headers()
        self.wfile.write(body)

    def do_GET(self):  # noqa: N802 - the base class's name
        if self.path == "/__stats__":
            with LOCK:
                return self._answer(f"{STATS['bytes']} {STATS['requests']}")
        if self.path == "/__reset__":
            with LOCK:
                STATS.update(bytes=0, requests=0)
            return self._answer("0 0")
        return super().do_GET()

    def send_head(self):
        path = self.translate_path(self.path)
        if not os.path.isfile(path):
            self.send_error(404, "not found")
            return None
        size = os.path.getsize(path)
        mtime = int(os.path.getmtime(path))
        start, end, status = 0, size - 1, 200
        m = re.fullmatch(r"bytes=(\d+)-(\d*)", (self.headers.get("Range") or "").strip())
        if m:
            start = int(m.group(1))
            end = min(int(m.group(2)) if m.group(2) else size - 1, size - 1)
            status = 206
        fh = open(path, "rb")  # noqa: SIM115 - closed by the base class
        self.send_response(status)
        if status == 206:
            self.send_header("Content-Range", f"bytes {start}-{end}/{size}")
        self.send_header("Content-Length", str(end - start + 1))
        self.send_header("Accept-Ranges", "bytes")
        self.send_header("ETag", f'"{mtime}-{size}"')
        self.send_header("Last-Modified", self.date_time_string(mtime))
        self.end_headers()
        fh.seek(start)
        self._left = end - start + 1
        with LOCK:
            STATS["requests"] += 1
        return fh

    def copyfile(self, source, outputfile):
        data = source.read(self._left)
        outputfile.write(data)
        with LOCK:
            STATS["bytes"] += len(data)


def main(folder: str) -> None:
    """Serve ``folder`` on a free loopback port until standard input closes."""
    import functools

    httpd = http.server.ThreadingHTTPServer(
        ("127.0.0.1", 0), functools.partial(RangeHandler, directory=folder)
    )
    httpd.daemon_threads = True
    threading.Thread(target=httpd.serve_forever, daemon=True).start()
    print(httpd.server_address[1], flush=True)
    sys.stdin.read()  # the test closes our standard input (or kills us) to stop the server
    httpd.shutdown()
    httpd.server_close()


if __name__ == "__main__":
    main(sys.argv[1])
