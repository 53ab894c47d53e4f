# veer for LibreOffice Calc: the add-in component behind the VEER.* cell
# functions. It holds no statistics: every call is forwarded over HTTP to the
# local veer server (`veer serve`, 127.0.0.1, port 7311 unless configured),
# and the answer (a value, a column or a table, or an error) is handed back to
# Calc.
#
# This file is the template of the component. `veer calc-extension` copies it
# into the .oxt and fills in CATALOGUE (the functions, their parameters and
# help text) from the server's function catalogue, so the list of functions is
# kept in one place. Its IDL interface (org.veer.calc.XFunctions, one method
# per function) and CalcAddIns.xcu are generated from the same catalogue.
#
# Screening is an aid: a signal prompts review by a licensed clinician under
# local occupational-health rules; it is not a diagnosis.
#
# The part down to "UNO component" imports nothing from LibreOffice, so it
# can be tested with any Python 3 (see testdata/core_test.py).

import http.client
import json
import math
import os
import socket
import struct
import sys
import threading
import time

# CATALOGUE lists the cell functions: name (VEER.X), method (the UNO method
# name), description (the Function Wizard text), params [{name, type,
# optional, help, idl}], result (value, column or table), writes, slow and
# local (answered here, not by the server). Filled in by the builder.
CATALOGUE = []  # @@CATALOGUE@@

SERVICE_NAME = "veer"
IMPLEMENTATION_NAME = "org.veer.calc.Functions"
ADDIN_SERVICE = "com.sun.star.sheet.AddIn"

DEFAULT_PORT = 7311
HOST = "127.0.0.1"  # the server listens on loopback only: health data stay on this computer
CONNECT_TIMEOUT = 1.0  # seconds; a server that is not running answers at once
CALL_TIMEOUT = 70.0  # seconds; the server stops a normal call after 60 s
SLOW_CALL_TIMEOUT = 610.0  # seconds; the server stops a slow call after 10 min
UNREACHABLE_PAUSE = 5.0  # seconds without new attempts after a connect timed out

# Calc's internal error numbers (formula/errorcodes.hxx), which Calc shows as
# the spreadsheet error texts. An add-in passes one back as a NaN whose low
# bits carry the number, exactly as Calc itself stores errors in matrices.
ERROR_NUMBERS = {
    "#NULL!": 521,
    "#DIV/0!": 532,
    "#VALUE!": 519,
    "#REF!": 524,
    "#NAME?": 525,
    "#NUM!": 503,
    "#N/A": 0x7FFF,
}
ERROR_CODES = {v: k for k, v in ERROR_NUMBERS.items()}
# Calc has no "busy" or "not connected" error. A call that cannot be answered
# now (server not running, busy, timed out) shows #N/A, "not available", like
# any value that is missing; VEER.ERRORS() shows why.
UNAVAILABLE = "#N/A"


def error_value(code):
    """The Calc error value for a spreadsheet error code such as "#N/A".
    #BUSY! (the server is at its limits; retry later) becomes #N/A, any
    other code Calc lacks #VALUE!."""
    if code == "#BUSY!":
        code = UNAVAILABLE
    n = ERROR_NUMBERS.get(code, ERROR_NUMBERS["#VALUE!"])
    return struct.unpack("<d", struct.pack("<Q", 0x7FF8000000000000 | n))[0]


def error_code_of(x):
    """The error code ("#N/A", ...) that Calc coded into the NaN x."""
    if math.isinf(x):
        return "#NUM!"
    bits = struct.unpack("<Q", struct.pack("<d", x))[0]
    lo = bits & 0xFFFFFFFF
    if lo == 0:
        return "#NUM!"
    if lo & 0xFFFF0000:
        return "#VALUE!"
    return ERROR_CODES.get(lo & 0xFFFF, "#VALUE!")


class VeerError(Exception):
    """A spreadsheet error with a message for the user."""

    def __init__(self, code, message):
        Exception.__init__(self, "%s %s" % (code, message))
        self.code = code
        self.message = message


# ---------------------------------------------------------------- settings


def _data_dir():
    """The veer server's default data directory (where its token lives)."""
    x = os.environ.get("XDG_DATA_HOME", "")
    if x and os.path.isabs(x):
        return os.path.join(x, "veer")
    home = os.path.expanduser("~")
    if sys.platform == "darwin":
        return os.path.join(home, "Library", "Application Support", "veer")
    if sys.platform.startswith("win"):
        return os.path.join(os.environ.get("APPDATA", home), "veer")
    return os.path.join(home, ".local", "share", "veer")


def config_path():
    """The add-in's settings file: $XDG_CONFIG_HOME/veer/calc.json."""
    x = os.environ.get("XDG_CONFIG_HOME", "")
    if not (x and os.path.isabs(x)):
        if sys.platform.startswith("win"):
            x = os.environ.get("APPDATA", os.path.expanduser("~"))
        else:
            x = os.path.join(os.path.expanduser("~"), ".config")
    return os.path.join(x, "veer", "calc.json")


def _read_small(path, limit=1 << 16):
    try:
        with open(path, "rb") as f:
            return f.read(limit).decode("utf-8")
    except (OSError, UnicodeDecodeError):
        return None


class Settings(object):
    """Where the server is and the write token.

    Environment variables win (VEER_PORT, VEER_TOKEN, VEER_TIMEOUT), then the
    settings file (config_path(): {"port": 7311, "token": "...", "timeout":
    70}), then the defaults; without a token anywhere, the server's own token
    file in its default data folder is used (same user, same computer). The
    file is read again whenever it changes, so no restart of LibreOffice is
    needed after editing it.
    """

    def __init__(self, env=None, path=None):
        self._env = os.environ if env is None else env
        self._path = path or config_path()
        self._stamp = None
        self._file = {}

    def _load(self):
        try:
            st = os.stat(self._path)
            stamp = (st.st_mtime_ns, st.st_size)
        except OSError:
            stamp = None
        if stamp == self._stamp:
            return
        self._stamp = stamp
        self._file = {}
        if stamp is None:
            return
        text = _read_small(self._path)
        try:
            data = json.loads(text) if text else {}
        except ValueError:
            raise VeerError("#VALUE!", "the settings file %s is not valid JSON; "
                            "write it as {\"port\": 7311, \"token\": \"...\"}" % self._path)
        if isinstance(data, dict):
            self._file = data

    def _get(self, env_name, key):
        v = self._env.get(env_name, "")
        if v != "":
            return v, "environment variable " + env_name
        self._load()
        v = self._file.get(key)
        if v not in (None, ""):
            return v, "%s in %s" % (key, self._path)
        return None, ""

    def port(self):
        v, where = self._get("VEER_PORT", "port")
        if v is None:
            return DEFAULT_PORT
        try:
            p = int(str(v).strip())
        except ValueError:
            p = 0
        if not 0 < p < 65536:
            raise VeerError("#VALUE!", "the veer port (%s) must be a whole number between 1 and 65535, not %r" % (where, v))
        return p

    def token(self):
        v, _ = self._get("VEER_TOKEN", "token")
        if v is not None:
            return str(v).strip()
        t = _read_small(os.path.join(_data_dir(), "token"), 4096)
        return t.strip() if t else ""

    def timeout(self, slow):
        v, where = self._get("VEER_TIMEOUT", "timeout")
        if v is None:
            return SLOW_CALL_TIMEOUT if slow else CALL_TIMEOUT
        try:
            t = float(v)
        except ValueError:
            t = 0
        if not t > 0:
            raise VeerError("#VALUE!", "the veer timeout (%s) must be a positive number of seconds, not %r" % (where, v))
        return t


# ---------------------------------------------------------------- transport


class Client(object):
    """Sends calls to the veer server over HTTP, one kept-alive connection."""

    def __init__(self, settings=None):
        self.settings = settings or Settings()
        self._lock = threading.Lock()
        self._conn = None
        self._conn_port = None
        self._pause_until = 0.0

    def close(self):
        with self._lock:
            self._drop()

    def _drop(self):
        if self._conn is not None:
            try:
                self._conn.close()
            except Exception:
                pass
        self._conn = None

    def _not_running(self, port, why):
        return VeerError(UNAVAILABLE, "the veer server is not running at http://%s:%d (%s); "
                         "start it with `veer serve` and recalculate (Ctrl+Shift+F9)" % (HOST, port, why))

    def call(self, fn, args, writes=False, slow=False):
        """Calls fn with args (JSON-ready) and returns the decoded value.

        Raises VeerError with the server's code and message, or #N/A when the
        server cannot be reached in time.
        """
        body = json.dumps({"fn": fn, "args": args}, allow_nan=False, separators=(",", ":")).encode("utf-8")
        port = self.settings.port()
        headers = {"Content-Type": "application/json", "Accept": "application/json"}
        if writes:
            tok = self.settings.token()
            if tok:
                headers["X-Veer-Token"] = tok
        timeout = self.settings.timeout(slow)
        with self._lock:
            if time.monotonic() < self._pause_until:
                raise self._not_running(port, "it did not answer a moment ago")
            status, data = self._post(port, body, headers, timeout)
        try:
            msg = json.loads(data.decode("utf-8"))
        except ValueError:
            raise VeerError("#VALUE!", "the server at port %d answered HTTP %d with something that is not veer's JSON; "
                            "is another program using that port?" % (port, status))
        if not isinstance(msg, dict):
            raise VeerError("#VALUE!", "unexpected answer from the veer server")
        err = msg.get("error")
        if err is not None:
            if isinstance(err, dict):
                raise VeerError(err.get("code") or "#VALUE!", err.get("message") or "")
            raise VeerError("#VALUE!", str(err))
        if status != 200:
            raise VeerError("#VALUE!", "the veer server answered HTTP %d" % status)
        return msg.get("value")

    def _post(self, port, body, headers, timeout):
        # A kept-alive connection may have been closed by a server restart:
        # then the request is sent once more on a new connection.
        for attempt in (0, 1):
            fresh = False
            if self._conn is None or self._conn_port != port:
                self._drop()
                conn = http.client.HTTPConnection(HOST, port, timeout=CONNECT_TIMEOUT)
                try:
                    conn.connect()
                except socket.timeout:
                    self._pause_until = time.monotonic() + UNREACHABLE_PAUSE
                    raise self._not_running(port, "no answer within %g s" % CONNECT_TIMEOUT)
                except OSError as e:
                    raise self._not_running(port, _reason(e))
                self._conn, self._conn_port, fresh = conn, port, True
            try:
                self._conn.sock.settimeout(timeout)
                self._conn.request("POST", "/v1/call", body, headers)
                resp = self._conn.getresponse()
                data = resp.read()
                if resp.getheader("Connection", "").lower() == "close":
                    self._drop()
                return resp.status, data
            except socket.timeout:
                self._drop()
                raise VeerError(UNAVAILABLE, "the veer server did not answer within %g s; "
                                "recalculate later, or raise the timeout (VEER_TIMEOUT)" % timeout)
            except (http.client.HTTPException, OSError) as e:
                self._drop()
                if fresh or attempt == 1:
                    raise self._not_running(port, "connection lost: " + _reason(e))
        raise self._not_running(port, "connection lost")


def _reason(e):
    if isinstance(e, ConnectionRefusedError):
        return "connection refused"
    s = str(e) or e.__class__.__name__
    return s


# ---------------------------------------------------------------- values


def to_wire(x):
    """A Calc argument value as veer's JSON cell value(s).

    Calc passes ranges as tuples of row tuples, a blank cell as an empty
    text. It does not call an add-in with a range or array holding error
    cells (the cell shows Err:504); should an error still come, as a coded
    NaN or a void element, it is sent as the error it is (void: #N/A).
    """
    if isinstance(x, tuple):
        return [[_wire_cell(c) for c in row] if isinstance(row, tuple) else _wire_cell(row) for row in x]
    return _wire_cell(x)


def _wire_cell(c):
    if c is None:
        return {"error": "#N/A"}
    if isinstance(c, bool):
        return c
    if isinstance(c, float):
        if math.isnan(c) or math.isinf(c):
            return {"error": error_code_of(c)}
        return c
    if isinstance(c, int):
        return float(c)
    if isinstance(c, str):
        return None if c == "" else c
    return str(c)


def wire_args(params, args):
    """The JSON arguments of one call. Calc passes every declared parameter;
    an omitted optional one arrives as None and travels as null; trailing
    nulls are left off."""
    out = []
    for p, a in zip(params, args):
        if a is None:
            out.append(None)
        elif p["idl"] == "string":
            out.append(a)
        else:
            out.append(to_wire(a))
    while out and out[-1] is None:
        out.pop()
    return out


def _calc_cell(v, errors):
    if v is None:
        return None  # Calc shows an empty cell
    if isinstance(v, bool):
        # TRUE/FALSE travel as 1/0: Calc (7.4) cannot read a UNO boolean in
        # an add-in's result (its conversion to a number leaves the value
        # unset), and 1/0 is how Calc itself stores TRUE and FALSE.
        return 1.0 if v else 0.0
    if isinstance(v, (int, float)):
        return float(v)
    if isinstance(v, str):
        return v
    if isinstance(v, dict) and "error" in v:
        code = v.get("error") or "#VALUE!"
        errors.append((code, v.get("message") or ""))
        return error_value(code)
    return json.dumps(v)


def to_calc(value, shape, errors):
    """The server's answer as Calc wants it: a scalar for shape "value", a
    tuple of equally long row tuples otherwise. Error cells are collected in
    errors as (code, message)."""
    if shape == "value":
        while isinstance(value, list):
            if not value:
                raise VeerError("#N/A", "the answer is empty")
            value = value[0]
        v = _calc_cell(value, errors)
        return "" if v is None else v
    if not isinstance(value, list):
        return ((_calc_cell(value, errors),),)
    if not value:
        raise VeerError("#N/A", "the answer is empty")
    rows = [[_calc_cell(c, errors) for c in r] if isinstance(r, list) else [_calc_cell(r, errors)] for r in value]
    width = max(len(r) for r in rows) or 1
    return tuple(tuple(r + [None] * (width - len(r))) for r in rows)


def error_result(shape, code):
    v = error_value(code)
    return v if shape == "value" else ((v,),)


# ---------------------------------------------------------------- messages


class MessageLog(object):
    """The most recent error messages, for VEER.ERRORS()."""

    def __init__(self, size=50):
        self.size = size
        self._lock = threading.Lock()
        self._items = []  # newest last: [time, function, code, message, count]

    def add(self, fn, code, message):
        # The server's messages start with the function's name; the table
        # shows it in its own column, so it is not repeated.
        if message.startswith(fn + ": "):
            message = message[len(fn) + 2:]
        with self._lock:
            if self._items and self._items[-1][1:4] == [fn, code, message]:
                self._items[-1][0] = time.time()
                self._items[-1][4] += 1
                return
            self._items.append([time.time(), fn, code, message, 1])
            del self._items[:-self.size]

    def table(self):
        with self._lock:
            items = list(reversed(self._items))
        rows = [("time", "function", "error", "message", "times")]
        for t, fn, code, msg, n in items:
            rows.append((time.strftime("%H:%M:%S", time.localtime(t)), fn, code, msg, float(n)))
        if not items:
            rows.append(("", "", "", "no errors since LibreOffice started", 0.0))
        return tuple(rows)


# ---------------------------------------------------------------- dispatch


class Functions(object):
    """The cell functions without UNO: invoke(method, args) returns what
    Calc should show."""

    def __init__(self, client=None, log=None, catalogue=None):
        self.client = client or Client()
        self.log = log or MessageLog()
        self.catalogue = CATALOGUE if catalogue is None else catalogue
        self.by_method = dict((f["method"], f) for f in self.catalogue)

    def invoke(self, method, args):
        f = self.by_method[method]
        shape = f["result"]
        try:
            if f.get("local"):
                return getattr(self, "_local_" + method)(f, args)
            value = self.client.call(f["name"], wire_args(f["params"], args), writes=f.get("writes", False), slow=f.get("slow", False))
            errors = []
            out = to_calc(value, shape, errors)
            if errors:
                code, msg = errors[0]
                more = " (and %d more error cells)" % (len(errors) - 1) if len(errors) > 1 else ""
                self.log.add(f["name"], code, msg + more)
            return out
        except VeerError as e:
            self.log.add(f["name"], e.code, e.message)
            return error_result(shape, e.code)
        except Exception as e:  # never let Calc see a Python exception: it would only show #VALUE!
            self.log.add(f["name"], "#VALUE!", "internal error in the veer add-in: %s: %s" % (e.__class__.__name__, e))
            return error_result(shape, "#VALUE!")

    def _local_errors(self, f, args):
        return self.log.table()


# ---------------------------------------------------------------- UNO component
#
# Below, the Calc add-in: XAddIn (names and help for Calc's Function Wizard),
# XServiceName (the programmatic names are "veer.<method>", which Calc writes
# into .ods files in upper case as VEER.<NAME>, the same as the display name),
# XServiceInfo, XLocalizable, XCompatibilityNames (the name in .xlsx files)
# and the generated org.veer.calc.XFunctions.

try:
    import uno
    import unohelper
    from com.sun.star.lang import XLocalizable, XServiceInfo, XServiceName
    from com.sun.star.sheet import XAddIn, XCompatibilityNames
    from org.veer.calc import XFunctions
    _UNO_ERROR = None
except ImportError as _e:  # plain Python (tests), or the type library is missing
    _UNO_ERROR = _e

if _UNO_ERROR is None:

    class VeerAddIn(unohelper.Base, XFunctions, XAddIn, XServiceName, XServiceInfo, XLocalizable, XCompatibilityNames):
        def __init__(self, ctx, *args):
            self.ctx = ctx
            self.locale = uno.createUnoStruct("com.sun.star.lang.Locale")
            self.functions = _shared_functions()

        # XServiceName, XServiceInfo
        def getServiceName(self):
            return SERVICE_NAME

        def getImplementationName(self):
            return IMPLEMENTATION_NAME

        def supportsService(self, name):
            return name in (ADDIN_SERVICE, SERVICE_NAME)

        def getSupportedServiceNames(self):
            return (ADDIN_SERVICE, SERVICE_NAME)

        # XLocalizable
        def setLocale(self, locale):
            self.locale = locale

        def getLocale(self):
            return self.locale

        # XAddIn
        def _f(self, method):
            f = self.functions.by_method.get(method)
            if f is None:
                raise uno.getClass("com.sun.star.lang.IllegalArgumentException")("unknown veer method " + method, self, 0)
            return f

        def getProgrammaticFuntionName(self, display):
            for f in self.functions.catalogue:
                if f["name"].upper() == display.strip().upper():
                    return f["method"]
            return ""

        def getDisplayFunctionName(self, method):
            return self._f(method)["name"]

        def getFunctionDescription(self, method):
            return self._f(method)["description"]

        def getDisplayArgumentName(self, method, i):
            ps = self._f(method)["params"]
            return ps[i]["name"] if 0 <= i < len(ps) else ""

        def getArgumentDescription(self, method, i):
            ps = self._f(method)["params"]
            if not 0 <= i < len(ps):
                return ""
            p = ps[i]
            return p["help"] + (" (optional)" if p.get("optional") else "")

        def getProgrammaticCategoryName(self, method):
            return "Add-In"

        def getDisplayCategoryName(self, method):
            return "Add-In"

        # XCompatibilityNames
        def getCompatibilityNames(self, method):
            n = uno.createUnoStruct("com.sun.star.sheet.LocalizedName")
            n.Locale = uno.createUnoStruct("com.sun.star.lang.Locale", "en", "US", "")
            n.Name = self._f(method)["name"]
            return (n,)

    def _method(name):
        def call(self, *args):
            return self.functions.invoke(name, args)
        call.__name__ = name
        return call

    for _fn in CATALOGUE:
        setattr(VeerAddIn, _fn["method"], _method(_fn["method"]))

    _shared = []
    _shared_lock = threading.Lock()

    def _shared_functions():
        # One client (one connection, one message log) however many times
        # Calc instantiates the add-in.
        with _shared_lock:
            if not _shared:
                _shared.append(Functions())
            return _shared[0]

    g_ImplementationHelper = unohelper.ImplementationHelper()
    g_ImplementationHelper.addImplementation(VeerAddIn, IMPLEMENTATION_NAME, (ADDIN_SERVICE, SERVICE_NAME))
