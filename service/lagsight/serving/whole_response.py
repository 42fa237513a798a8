"""Make gunicorn send a response's header and (single-piece) body in one write.

gunicorn writes the status line and headers with one ``sendall`` and the body
with another. A worker killed between the two leaves a proxy holding a header it
has already forwarded and a body that never comes: the client sees a truncated
response, and the proxy cannot retry it elsewhere. Holding the header back and
sending it together with the first body piece means a killed worker either sent
nothing (the proxy sees the connection close before any header and retries on
another replica, see ops/failover.py) or a whole response (for bodies that fit in
the socket buffer, which Lagsight's reports do).

Applied by ``lagsight.serving.gunicorn_conf`` through ``_emit_body``, the hook gunicorn
documents for subclasses that frame the body differently; file responses
(sendfile) and responses without a body send their header as before.
"""
from __future__ import annotations

from gunicorn import util
from gunicorn.http import wsgi

_HELD = "_lagsight_held_header"


def install() -> None:
    response = wsgi.Response
    if getattr(response, "_lagsight_whole_response", False):
        return
    send_headers, emit_body, close, sendfile = (response.send_headers, response._emit_body, response.close,
                                                response.sendfile)

    def held_send_headers(self):
        if self.headers_sent or getattr(self, "_lagsight_direct", False):
            return send_headers(self)
        sock = self.sock

        class _Capture:  # collects the header bytes instead of writing them
            data = b""

            def sendall(self, data):
                _Capture.data += data

        self.sock = _Capture()
        try:
            send_headers(self)
        finally:
            self.sock = sock
        setattr(self, _HELD, _Capture.data)

    def flush(self):
        held = getattr(self, _HELD, None)
        if held:
            setattr(self, _HELD, None)
            util.write(self.sock, held)

    def whole_emit_body(self, data):
        held = getattr(self, _HELD, None)
        if held and not self.chunked:
            setattr(self, _HELD, None)
            util.write(self.sock, held + data)
            return
        flush(self)
        emit_body(self, data)

    def flushing_close(self):
        flush(self)
        close(self)
        flush(self)

    def direct_sendfile(self, respiter):
        flush(self)
        self._lagsight_direct = True
        try:
            return sendfile(self, respiter)
        finally:
            self._lagsight_direct = False

    response.send_headers = held_send_headers
    response._emit_body = whole_emit_body
    response.close = flushing_close
    response.sendfile = direct_sendfile
    response._lagsight_whole_response = True
