#!/usr/bin/python3
"""httpserver - a scriptable local HTTP/1.1 receiver for integration tests.

It plays the endpoint tidepost posts readings to, and misbehaves on cue.
Standard library only (Debian's /usr/bin/python3).

As a module:

    srv = ScriptedServer(script=[{"status": 503, "retry_after": "2"}],
                         default={"status": 204}, log_path="post.log")
    srv.start()                         # srv.port, srv.url
    srv.script = [{"commit_then_reset": True}]   # change it while running
    ...
    srv.stop()
    report = srv.check_delivery(expected_ids)    # or srv.assert_delivery()

From the command line (the first stdout line is the port; SIGHUP re-reads
a --script @FILE; SIGTERM/SIGINT stop it and print a JSON summary line):

    httpserver.py --port 0 --log FILE --script JSON|@FILE [--tls CERT KEY]

Script.  A list of actions, applied in order to successive requests; when
it runs out, the default action ({"status": 204} unless told) applies to
every further request.  A script may also be given as {"actions": [...],
"default": {...}}.  Every action may carry "repeat": N (use it N times).

  {"status": 204}                  answer with that status
      optional: "retry_after": RAW (the Retry-After value, sent verbatim:
      seconds, an HTTP-date, garbage), "headers": {name: value},
      "body": TEXT, "close": true (Connection: close, then close),
      "delay_s": S or [LO, HI] (wait, uniform in [LO, HI], then answer)
  {"stall_s": 30}                  read the request, never answer; close
                                   after 30 s
  {"reset": "before_headers"}      read the request, then RST (SO_LINGER 0)
  {"reset": "mid_body"}            send the headers and part of the body,
                                   then RST
  {"commit_then_reset": true}      store the readings, then RST, no reply
  {"commit_then_status": 500}      store the readings, answer 500
  {"trickle": 1}                   answer (status 200 unless "status") at
                                   1 byte per second, headers included
  {"endless_body": true}           200, no length, body bytes until the
                                   client goes away (bytes counted)
  {"headers_then_stall": true}     send 200 headers with Content-Length,
                                   no body; close after "stall_s" (30)
  {"accept_stall_s": 30}           connection level: taken from the script
                                   when a connection is accepted (if it is
                                   next); nothing is read or sent, not even
                                   the TLS handshake, for 30 s
  {"accept_reset": true}           connection level: RST right at accept

"commit": true/false overrides whether the readings of that request count
as delivered.  By default they do when a 2xx status line is (or starts to
be) sent - so trickle, endless_body, headers_then_stall and a 2xx
"reset": "mid_body" commit - and for commit_then_*; stall_s and
"reset": "before_headers" do not.

Log.  One JSON line per request, written when the request has been read
and its action chosen: "event": "request", "time" (UTC, RFC 3339),
"mono" (CLOCK_MONOTONIC seconds, comparable with the daemon's),
"conn" (connection id: the same id means the connection was reused),
"conn_req" (the request's index on that connection), "method", "path",
"headers" (every header, lower-case names, repeats joined with ", "),
"body" (text), "body_len", "ids" (reading ids found in the body),
"body_error" (if the body did not parse), "response" (the action taken).
Connection-level lines: "event": "tls_error" / "accept_action" / "bad".
The log carries the Authorization header on purpose (tests check the
token arrives); it is a test artefact, never a daemon log.

Bodies.  {"readings": [...]} batches, NDJSON (one reading per line), a
single reading object, or a JSON list of readings; each reading's "id"
(and "station", "seq") is taken.  check_delivery() compares what was
committed with the ids the test expected.
"""

import datetime
import json
import random
import select
import signal
import socket
import ssl
import struct
import sys
import threading
import time

DEFAULT_ACTION = {"status": 204}
MAX_LINE = 8192
MAX_HEADERS = 65536
MAX_BODY = 64 << 20

REASONS = {
    200: "OK", 201: "Created", 202: "Accepted", 204: "No Content",
    301: "Moved Permanently", 302: "Found", 307: "Temporary Redirect",
    400: "Bad Request", 401: "Unauthorized", 403: "Forbidden",
    404: "Not Found", 408: "Request Timeout", 409: "Conflict",
    413: "Content Too Large", 415: "Unsupported Media Type",
    422: "Unprocessable Content", 425: "Too Early",
    429: "Too Many Requests", 500: "Internal Server Error",
    502: "Bad Gateway", 503: "Service Unavailable",
    504: "Gateway Timeout",
}   # reason phrases from RFC 9110 section 15 (RFC 6585, 8470 for 429, 425)


class BadRequest(Exception):
    pass


class ClientGone(Exception):
    pass


def _now_rfc3339():
    t = datetime.datetime.now(datetime.timezone.utc)
    return t.strftime("%Y-%m-%dT%H:%M:%S.") + "%03dZ" % (t.microsecond // 1000)


def expand_script(actions):
    """A script list with every "repeat": N expanded into N copies."""
    out = []
    for act in actions:
        if not isinstance(act, dict):
            raise ValueError("httpserver: script action is not an object: %r"
                             % (act,))
        act = dict(act)
        n = act.pop("repeat", 1)
        if not isinstance(n, int) or n < 0:
            raise ValueError("httpserver: bad repeat: %r" % (n,))
        out.extend(dict(act) for _ in range(n))
    return out


def parse_script(text):
    """(actions, default) from JSON text: a list or {actions, default}."""
    doc = json.loads(text)
    default = None
    if isinstance(doc, dict):
        default = doc.get("default")
        doc = doc.get("actions", [])
    if not isinstance(doc, list):
        raise ValueError("httpserver: script must be a list of actions")
    return expand_script(doc), default


def _reading_ids(obj):
    """[(id, station, seq, reading)] from one decoded JSON value."""
    if isinstance(obj, dict) and isinstance(obj.get("readings"), list):
        items = obj["readings"]
    elif isinstance(obj, list):
        items = obj
    else:
        items = [obj]
    out = []
    for r in items:
        if not isinstance(r, dict) or "id" not in r:
            raise ValueError("a reading without an id")
        out.append((str(r["id"]), r.get("station"), r.get("seq"), r))
    return out


def parse_body(body, content_type):
    """Readings in a request body: [(id, station, seq, reading)].

    Raises ValueError with a message when the body is not readings.
    """
    if not body.strip():
        return []
    text = body.decode("utf-8")
    ctype = (content_type or "").split(";")[0].strip().lower()
    if ctype != "application/x-ndjson":
        try:
            return _reading_ids(json.loads(text))
        except json.JSONDecodeError:
            if ctype == "application/json":
                raise
    out = []
    for n, line in enumerate(text.splitlines(), 1):
        if line.strip():
            try:
                out.extend(_reading_ids(json.loads(line)))
            except json.JSONDecodeError as e:
                raise ValueError("ndjson line %d: %s" % (n, e)) from None
    return out


class _Conn:
    """One accepted connection: a buffered reader plus the raw socket."""

    def __init__(self, sock, cid):
        self.sock = sock
        self.cid = cid
        self.rfile = sock.makefile("rb")
        self.nreq = 0

    def readline(self, limit=MAX_LINE):
        line = self.rfile.readline(limit + 1)
        if len(line) > limit:
            raise BadRequest("line longer than %d bytes" % limit)
        return line

    def read(self, n):
        data = self.rfile.read(n)
        if len(data) != n:
            raise ClientGone("body cut short")
        return data

    def send(self, data):
        try:
            self.sock.sendall(data)
        except (OSError, ssl.SSLError) as e:
            raise ClientGone(str(e)) from None

    def reset(self):
        """Closes with SO_LINGER 0, so the peer gets a RST."""
        try:
            self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER,
                                 struct.pack("ii", 1, 0))
        except OSError:
            pass
        self.close()

    def close(self):
        for f in (self.rfile.close, self.sock.close):
            try:
                f()
            except (OSError, ssl.SSLError):
                pass


def _read_headers(conn):
    headers = {}
    total = 0
    while True:
        line = conn.readline()
        total += len(line)
        if total > MAX_HEADERS:
            raise BadRequest("headers longer than %d bytes" % MAX_HEADERS)
        if not line:
            raise ClientGone("eof in headers")
        if line in (b"\r\n", b"\n"):
            return headers
        name, sep, value = line.decode("latin-1").partition(":")
        if not sep or not name.strip() or name != name.strip():
            raise BadRequest("bad header line: %r" % line[:80])
        key = name.lower()
        value = value.strip()
        headers[key] = headers[key] + ", " + value if key in headers \
            else value


def _read_chunked(conn):
    body = b""
    while True:
        line = conn.readline().split(b";")[0].strip()
        try:
            size = int(line, 16)
        except ValueError:
            raise BadRequest("bad chunk size: %r" % line[:40]) from None
        if size == 0:
            break
        if len(body) + size > MAX_BODY:
            raise BadRequest("body over %d bytes" % MAX_BODY)
        body += conn.read(size)
        conn.readline()
    while conn.readline() not in (b"\r\n", b"\n", b""):
        pass                            # trailer fields are ignored
    return body


def read_request(conn):
    """(method, path, version, headers, body), or None at a clean EOF."""
    line = conn.readline()
    while line in (b"\r\n", b"\n"):
        line = conn.readline()
    if not line:
        return None
    parts = line.decode("latin-1").split()
    if len(parts) != 3 or not parts[2].startswith("HTTP/1."):
        raise BadRequest("bad request line: %r" % line[:80])
    method, path, version = parts
    headers = _read_headers(conn)
    if "100-continue" in headers.get("expect", "").lower():
        conn.send(b"HTTP/1.1 100 Continue\r\n\r\n")
    if "chunked" in headers.get("transfer-encoding", "").lower():
        body = _read_chunked(conn)
    else:
        try:
            n = int(headers.get("content-length", "0"))
        except ValueError:
            raise BadRequest("bad Content-Length") from None
        if n < 0 or n > MAX_BODY:
            raise BadRequest("Content-Length out of range: %d" % n)
        body = conn.read(n) if n else b""
    return method, path, version, headers, body


def _status_line(status):
    return "HTTP/1.1 %d %s\r\n" % (status, REASONS.get(status, "Status"))


def build_response(act, keep_alive):
    """Bytes of a plain response for a status action."""
    status = int(act.get("status", 200))
    if "body" in act:
        body = str(act["body"]).encode()
    elif status in (204, 304) or 100 <= status < 200:
        body = b""
    else:
        body = json.dumps({"status": status}).encode() + b"\n"
    head = _status_line(status)
    if body:
        head += "Content-Type: application/json\r\n"
    if status not in (204, 304):
        head += "Content-Length: %d\r\n" % len(body)
    if "retry_after" in act:
        head += "Retry-After: %s\r\n" % act["retry_after"]
    for name, value in act.get("headers", {}).items():
        head += "%s: %s\r\n" % (name, value)
    if not keep_alive:
        head += "Connection: close\r\n"
    return head.encode("latin-1") + b"\r\n" + body


def commits(act):
    """Whether a request answered with act counts as delivered."""
    if "commit" in act:
        return bool(act["commit"])
    if "commit_then_reset" in act or "commit_then_status" in act:
        return True
    if "stall_s" in act and "headers_then_stall" not in act:
        return False
    if "reset" in act:
        return act["reset"] == "mid_body" and \
            200 <= int(act.get("status", 200)) < 300
    return 200 <= int(act.get("status", 200)) < 300


class ScriptedServer:
    """The scriptable receiver.  See the module docstring for the script.

    Attributes for tests (read them after stop(), or under .lock):
      requests    every request's log entry (dicts as in the log, plus
                  "raw_body" bytes and "outcome" once the action is done)
      deliveries  [(id, station, seq, reading, request_index)] in commit
                  order, duplicates included
      events      connection-level entries (tls_error, accept_action, bad)
    """

    def __init__(self, script=None, default=None, log_path=None, tls=None,
                 host="127.0.0.1", port=0, idle_timeout_s=60.0):
        self.host = host
        self.port = port
        self.log_path = log_path
        self.idle_timeout_s = idle_timeout_s
        self.lock = threading.Lock()
        self.requests = []
        self.deliveries = []
        self.events = []
        self._actions = expand_script(script or [])
        self._default = dict(default or DEFAULT_ACTION)
        self._ctx = None
        if tls is not None:
            self._ctx = ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER)
            self._ctx.load_cert_chain(tls[0], tls[1])
        self._stop = threading.Event()
        self._lsock = None
        self._log = None
        self._threads = []
        self._conns = set()
        self._next_cid = 0

    # -- script ------------------------------------------------------------
    @property
    def script(self):
        with self.lock:
            return list(self._actions)

    @script.setter
    def script(self, actions):
        """Replaces the pending actions (the default stays)."""
        actions = expand_script(actions)
        with self.lock:
            self._actions = actions

    @property
    def default(self):
        with self.lock:
            return dict(self._default)

    @default.setter
    def default(self, act):
        with self.lock:
            self._default = dict(act)

    def push(self, *actions):
        """Appends actions to the pending script."""
        actions = expand_script(actions)
        with self.lock:
            self._actions.extend(actions)

    def _next_action(self, accept_level):
        with self.lock:
            if self._actions:
                head = self._actions[0]
                is_accept = "accept_stall_s" in head or "accept_reset" in head
                if is_accept == accept_level:
                    return self._actions.pop(0)
            return None if accept_level else dict(self._default)

    # -- lifetime ----------------------------------------------------------
    @property
    def url(self):
        return "%s://%s:%d" % ("https" if self._ctx else "http",
                               self.host, self.port)

    def start(self):
        self._lsock = socket.create_server((self.host, self.port),
                                           backlog=64)
        self.port = self._lsock.getsockname()[1]
        if self.log_path:
            self._log = open(self.log_path, "a", buffering=1)
        t = threading.Thread(target=self._accept_loop, daemon=True,
                             name="httpserver-accept")
        t.start()
        self._threads.append(t)
        return self

    def stop(self):
        self._stop.set()
        for t in self._threads[:1]:
            t.join(2)
        with self.lock:
            conns = list(self._conns)
        for c in conns:
            try:
                c.sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
        for t in self._threads[1:]:
            t.join(2)
        if self._lsock is not None:
            self._lsock.close()
            self._lsock = None
        if self._log is not None:
            self._log.close()
            self._log = None

    def __enter__(self):
        return self.start()

    def __exit__(self, *exc):
        self.stop()
        return False

    # -- accounting --------------------------------------------------------
    def _emit(self, entry, keep):
        line = {k: v for k, v in entry.items() if k != "raw_body"}
        with self.lock:
            keep.append(entry)
            if self._log is not None:
                self._log.write(json.dumps(line, sort_keys=True) + "\n")

    def _event(self, kind, cid, **more):
        entry = {"event": kind, "time": _now_rfc3339(),
                 "mono": time.monotonic(), "conn": cid}
        entry.update(more)
        self._emit(entry, self.events)

    def _commit(self, entry, readings):
        with self.lock:
            idx = entry["index"]
            for rid, station, seq, r in readings:
                self.deliveries.append((rid, station, seq, r, idx))
            entry["committed"] = True

    # -- connections -------------------------------------------------------
    def _accept_loop(self):
        while not self._stop.is_set():
            ready, _, _ = select.select([self._lsock], [], [], 0.2)
            if not ready:
                continue
            try:
                sock, _ = self._lsock.accept()
            except OSError:
                continue
            with self.lock:
                self._next_cid += 1
                cid = self._next_cid
            t = threading.Thread(target=self._serve, args=(sock, cid),
                                 daemon=True, name="httpserver-%d" % cid)
            t.start()
            self._threads.append(t)

    def _accept_action(self, sock, cid):
        """Applies a connection-level action; True if the conn is done."""
        act = self._next_action(True)
        if act is None:
            return False
        self._event("accept_action", cid, action=act)
        if act.get("accept_reset"):
            _Conn(sock, cid).reset()
            return True
        self._stop.wait(float(act["accept_stall_s"]))
        return False

    def _serve(self, sock, cid):
        if self._accept_action(sock, cid):
            return
        if self._stop.is_set():
            sock.close()
            return
        sock.settimeout(self.idle_timeout_s)
        if self._ctx is not None:
            try:
                sock = self._ctx.wrap_socket(sock, server_side=True)
            except (OSError, ssl.SSLError) as e:
                self._event("tls_error", cid, error=str(e))
                sock.close()
                return
        conn = _Conn(sock, cid)
        with self.lock:
            self._conns.add(conn)
        try:
            while not self._stop.is_set() and self._one_request(conn):
                pass
        except (ClientGone, OSError, ssl.SSLError):
            pass
        except BadRequest as e:
            self._event("bad", cid, error=str(e))
            try:
                conn.send(build_response({"status": 400}, False))
            except ClientGone:
                pass
        finally:
            with self.lock:
                self._conns.discard(conn)
            conn.close()

    def _one_request(self, conn):
        """Serves one request; False when the connection is over."""
        req = read_request(conn)
        if req is None:
            return False
        method, path, version, headers, body = req
        conn.nreq += 1
        act = self._next_action(False)
        entry = self._entry(conn, req, act)
        self._emit(entry, self.requests)
        keep = version == "HTTP/1.1" and \
            headers.get("connection", "").lower() != "close" and \
            not act.get("close")
        outcome = self._apply(conn, entry, act, keep)
        entry["outcome"] = outcome
        return outcome == "answered" and keep

    def _entry(self, conn, req, act):
        method, path, _, headers, body = req
        entry = {"event": "request", "time": _now_rfc3339(),
                 "mono": time.monotonic(), "conn": conn.cid,
                 "conn_req": conn.nreq, "method": method, "path": path,
                 "headers": headers, "body": body.decode("utf-8", "replace"),
                 "body_len": len(body), "raw_body": body, "ids": [],
                 "response": act, "committed": False}
        try:
            entry["readings"] = parse_body(body, headers.get("content-type"))
            entry["ids"] = [r[0] for r in entry["readings"]]
        except (ValueError, UnicodeDecodeError) as e:
            entry["readings"] = []
            entry["body_error"] = str(e)
        with self.lock:
            entry["index"] = len(self.requests)
        return entry

    # -- actions -----------------------------------------------------------
    def _apply(self, conn, entry, act, keep):
        readings = entry.pop("readings")
        if commits(act):
            self._commit(entry, readings)
        delay = act.get("delay_s")
        if isinstance(delay, list):
            delay = random.uniform(delay[0], delay[1])
        if delay:
            self._stop.wait(float(delay))
        if "commit_then_reset" in act or "reset" in act:
            return self._do_reset(conn, act)
        if "stall_s" in act and "headers_then_stall" not in act:
            self._stop.wait(float(act["stall_s"]))
            return "stalled"
        if "trickle" in act:
            return self._do_trickle(conn, act)
        if act.get("endless_body"):
            return self._do_endless(conn, entry)
        if act.get("headers_then_stall"):
            conn.send(_status_line(int(act.get("status", 200))).encode() +
                      b"Content-Type: application/json\r\n"
                      b"Content-Length: 100\r\n\r\n")
            self._stop.wait(float(act.get("stall_s", 30)))
            return "stalled"
        if "commit_then_status" in act:
            act = dict(act, status=act["commit_then_status"])
        conn.send(build_response(act, keep))
        return "answered"

    def _do_reset(self, conn, act):
        if act.get("reset") == "mid_body":
            conn.send(_status_line(int(act.get("status", 200))).encode() +
                      b"Content-Type: application/json\r\n"
                      b"Content-Length: 1000\r\n\r\n{\"partial\": ")
            time.sleep(0.05)
        conn.reset()
        return "reset"

    def _do_trickle(self, conn, act):
        rate = float(act["trickle"])
        data = build_response(dict(act, status=act.get("status", 200),
                                   body=act.get("body",
                                                '{"accepted": true}\n')),
                              False)
        for i in range(len(data)):
            if self._stop.wait(1.0 / rate):
                return "stopped"
            conn.send(data[i:i + 1])
        return "trickled"

    def _do_endless(self, conn, entry):
        conn.send(b"HTTP/1.1 200 OK\r\nContent-Type: application/json\r\n"
                  b"Connection: close\r\n\r\n")
        chunk = b"[" + b"0," * 4095 + b"\n"
        sent = 0
        try:
            while not self._stop.is_set():
                conn.send(chunk)
                sent += len(chunk)
        except ClientGone:
            pass
        entry["body_bytes_sent"] = sent
        return "endless"

    # -- checks ------------------------------------------------------------
    def delivered_ids(self):
        """The set of reading ids committed at least once."""
        with self.lock:
            return {d[0] for d in self.deliveries}

    def check_delivery(self, expected, allow_missing=(),
                       ignore_keys=("received",)):
        """Compares the committed readings with the expected ids.

        expected: reading ids in the order they were accepted.
        allow_missing: ids that may be absent (e.g. dead-lettered).
        Returns a dict; "ok" is True when nothing expected is lost, no id
        was delivered that was not expected, no id carried two different
        readings (id reuse), no reading came under two ids, and, per
        station, first deliveries follow the expected order.
        """
        with self.lock:
            dels = list(self.deliveries)
        exp_set = set(expected)
        got = {}
        dup = {}
        for rid, _, _, r, _ in dels:
            got.setdefault(rid, []).append(r)
        may_miss = set(allow_missing)
        lost = [i for i in expected if i not in got and i not in may_miss]
        phantom = sorted(set(got) - exp_set)
        for rid, rs in got.items():
            if len(rs) > 1:
                dup[rid] = len(rs)
        reuse, changed = _identity_problems(got, ignore_keys)
        order = _order_problems(expected, dels)
        ok = not (lost or phantom or reuse or changed or order)
        return {"ok": ok, "lost": lost, "phantom": phantom,
                "duplicates": dup, "id_reuse": reuse, "id_changed": changed,
                "order": order, "unique": len(got), "deliveries": len(dels)}

    def assert_delivery(self, expected, **kw):
        """check_delivery(), raising AssertionError with the details."""
        rep = self.check_delivery(expected, **kw)
        if not rep["ok"]:
            brief = {k: v for k, v in rep.items() if v and k != "ok"}
            raise AssertionError("delivery check failed: %s"
                                 % json.dumps(brief, default=str)[:2000])
        return rep

    def retry_consistency(self):
        """Problems with retries: one key with two bodies, or one body
        (with readings) sent under two Idempotency-Keys.  [] is good."""
        by_key = {}
        by_body = {}
        with self.lock:
            reqs = list(self.requests)
        for e in reqs:
            key = e["headers"].get("idempotency-key")
            if key is not None:
                by_key.setdefault(key, set()).add(e["raw_body"])
            if e["ids"]:
                by_body.setdefault(e["raw_body"], set()).add(key)
        out = ["key %s carried %d different bodies" % (k, len(v))
               for k, v in by_key.items() if len(v) > 1]
        out += ["one body (ids %s...) was sent under keys %s"
                % (b[:60], sorted(map(str, v)))
                for b, v in by_body.items() if len(v) > 1]
        return out


def _canon(r, ignore_keys):
    return json.dumps({k: v for k, v in r.items()
                       if k != "id" and k not in ignore_keys},
                      sort_keys=True)


def _identity_problems(got, ignore_keys):
    reuse = []
    owner = {}
    changed = []
    for rid, rs in got.items():
        forms = {_canon(r, ignore_keys) for r in rs}
        if len(forms) > 1:
            reuse.append(rid)
        for f in forms:
            other = owner.setdefault(f, rid)
            if other != rid:
                changed.append(sorted([other, rid]))
    return sorted(reuse), changed


def _order_problems(expected, dels):
    """{station: {"expected": [...], "got": [...]}} where order broke."""
    first = []
    seen = set()
    station_of = {}
    for rid, station, _, _, _ in dels:
        station_of.setdefault(rid, station)
        if rid not in seen:
            seen.add(rid)
            first.append(rid)
    out = {}
    for st in {station_of[i] for i in first}:
        got = [i for i in first if station_of[i] == st]
        want = [i for i in expected if i in seen and station_of[i] == st]
        if got != want:
            out[str(st)] = {"expected": want[:20], "got": got[:20]}
    return out


# ---------------------------------------------------------------------------
# Command line.

def _load_script(arg):
    if arg is None:
        return [], None
    if arg.startswith("@"):
        with open(arg[1:]) as f:
            return parse_script(f.read())
    return parse_script(arg)


def main(argv):
    import argparse
    ap = argparse.ArgumentParser(prog="httpserver.py",
                                 description="Scriptable HTTP/1.1 receiver")
    ap.add_argument("--host", default="127.0.0.1")
    ap.add_argument("--port", type=int, default=0)
    ap.add_argument("--log", help="append one JSON line per request here")
    ap.add_argument("--script", help="JSON text, or @FILE (re-read on "
                    "SIGHUP)")
    ap.add_argument("--tls", nargs=2, metavar=("CERT", "KEY"))
    ap.add_argument("--idle-timeout", type=float, default=60.0)
    args = ap.parse_args(argv)
    try:
        actions, default = _load_script(args.script)
    except (OSError, ValueError) as e:
        print("httpserver: --script: %s" % e, file=sys.stderr)
        return 2
    srv = ScriptedServer(actions, default, args.log,
                         tuple(args.tls) if args.tls else None,
                         args.host, args.port, args.idle_timeout)
    srv.start()
    print(srv.port, flush=True)
    done = threading.Event()

    def on_hup(signum, frame):
        try:
            acts, dflt = _load_script(args.script)
        except (OSError, ValueError) as e:
            print("httpserver: reload: %s" % e, file=sys.stderr)
            return
        srv.script = acts
        if dflt is not None:
            srv.default = dflt

    signal.signal(signal.SIGHUP, on_hup)
    signal.signal(signal.SIGTERM, lambda s, f: done.set())
    signal.signal(signal.SIGINT, lambda s, f: done.set())
    while not done.wait(0.5):
        pass
    srv.stop()
    print(json.dumps({"requests": len(srv.requests),
                      "deliveries": len(srv.deliveries),
                      "unique": len(srv.delivered_ids())}), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
