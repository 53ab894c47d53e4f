# Tests of the Calc add-in's Python core (everything but the UNO class),
# run by TestPythonCore with any Python 3 against a real veer server:
#
#   python3 core_test.py DIR PORT DOWN_PORT
#
# DIR holds the generated veer_calc.py, PORT is the running server's port,
# DOWN_PORT a port where nothing listens.

import http.client
import json
import os
import socket
import struct
import sys
import tempfile
import threading
import time
import unittest

DIR, PORT, DOWN_PORT = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
del sys.argv[1:]
sys.modules["uno"] = None  # test the core alone, as without LibreOffice
sys.path.insert(0, DIR)
import veer_calc as vc  # noqa: E402

# Calc's error numbers, from LibreOffice's include/formula/errorcodes.hxx
# (FormulaError: NoValue 519, NoCode 521, NoRef 524, NoName 525,
# IllegalFPOperation 503, DivisionByZero 532, NotAvailable 0x7fff) and how
# Calc codes them in a double (CreateDoubleError: a NaN whose low 32 bits of
# the mantissa hold the number).
CALC_NUMBERS = {"#VALUE!": 519, "#NULL!": 521, "#REF!": 524, "#NAME?": 525, "#NUM!": 503, "#DIV/0!": 532, "#N/A": 0x7FFF}


def bits(x):
    return struct.unpack("<Q", struct.pack("<d", x))[0]


def direct(fn, args):
    """The server's own answer, bypassing the add-in."""
    c = http.client.HTTPConnection("127.0.0.1", PORT, timeout=30)
    try:
        c.request("POST", "/v1/call", json.dumps({"fn": fn, "args": args}), {"Content-Type": "application/json"})
        return json.loads(c.getresponse().read())
    finally:
        c.close()


_clients = []


def functions(env=None, path=None):
    env = {"VEER_PORT": str(PORT)} if env is None else env
    path = path or os.path.join(tempfile.mkdtemp(), "none.json")
    c = vc.Client(vc.Settings(env=env, path=path))
    _clients.append(c)
    return vc.Functions(client=c)


def tearDownModule():
    for c in _clients:
        c.close()


def params_of(name):
    for f in vc.CATALOGUE:
        if f["name"] == name:
            return f
    raise KeyError(name)


class ErrorValues(unittest.TestCase):
    def test_coded_like_calc(self):
        for code, n in CALC_NUMBERS.items():
            with self.subTest(code=code):
                v = vc.error_value(code)
                self.assertNotEqual(v, v, "an error value is a NaN")
                self.assertEqual(bits(v) & 0xFFFFFFFF, n)
                self.assertEqual(vc.error_code_of(v), code)

    def test_unknown_codes(self):
        # #BUSY! has no Calc counterpart: "not available now" is #N/A; an
        # unknown code becomes #VALUE!.
        self.assertEqual(bits(vc.error_value("#BUSY!")) & 0xFFFFFFFF, 0x7FFF)
        self.assertEqual(bits(vc.error_value("#WHAT?")) & 0xFFFFFFFF, 519)
        self.assertEqual(vc.error_code_of(float("nan")), "#NUM!")  # a plain NaN: low bits 0
        self.assertEqual(vc.error_code_of(float("inf")), "#NUM!")


class Conversions(unittest.TestCase):
    def test_to_wire(self):
        cases = [
            ("number", 3.5, 3.5),
            ("int becomes float", 3, 3.0),
            ("text", "a", "a"),
            ("blank single value", "", None),
            ("bool", True, True),
            ("range rows", ((1.0, ""), ("x", 2.0)), [[1.0, None], ["x", 2.0]]),
            ("error cell in a range", ((None,),), [[{"error": "#N/A"}]]),
            ("coded error in an array", ((vc.error_value("#DIV/0!"),),), [[{"error": "#DIV/0!"}]]),
        ]
        for name, x, want in cases:
            with self.subTest(name):
                self.assertEqual(vc.to_wire(x), want)

    def test_wire_args(self):
        f = params_of("VEER.ZSCORE")
        got = vc.wire_args(f["params"], ("m", ((30.0,),), ((120.0,),), None, "extrapolate=true"))
        self.assertEqual(got, ["m", [[30.0]], [[120.0]], None, "extrapolate=true"])
        got = vc.wire_args(f["params"], ("m", ((30.0,),), ((120.0,),), None, None))
        self.assertEqual(got, ["m", [[30.0]], [[120.0]]], "trailing omitted arguments are left off")

    def test_to_calc(self):
        errs = []
        self.assertEqual(vc.to_calc(2, "value", errs), 2.0)
        self.assertIsInstance(vc.to_calc(2, "value", errs), float)
        self.assertEqual(vc.to_calc([[7.0, 1.0]], "value", errs), 7.0)
        self.assertEqual(vc.to_calc(None, "value", errs), "")
        self.assertEqual(vc.to_calc([1, 2], "column", errs), ((1.0,), (2.0,)))
        self.assertEqual(vc.to_calc([[1, "a"], [True, False]], "table", errs), ((1.0, "a"), (1.0, 0.0)))
        self.assertIsInstance(vc.to_calc(True, "value", errs), float)
        self.assertEqual(vc.to_calc(5.0, "column", errs), ((5.0,),))
        self.assertEqual(errs, [])
        out = vc.to_calc([1.0, {"error": "#N/A", "message": "row 2: the age is blank"}], "column", errs)
        self.assertEqual(bits(out[1][0]) & 0xFFFFFFFF, 0x7FFF)
        self.assertEqual(errs, [("#N/A", "row 2: the age is blank")])
        with self.assertRaises(vc.VeerError):
            vc.to_calc([], "table", [])


class AgainstServer(unittest.TestCase):
    def test_catalogue_matches_server(self):
        c = http.client.HTTPConnection("127.0.0.1", PORT, timeout=30)
        c.request("GET", "/v1/functions")
        listing = json.loads(c.getresponse().read())
        c.close()
        served = [f["name"] for f in listing["functions"]]
        mine = [f["name"] for f in vc.CATALOGUE if not f["local"]]
        self.assertEqual(mine, served)
        for f in listing["functions"]:
            g = params_of(f["name"])
            self.assertEqual([p["name"] for p in g["params"]], [p["name"] for p in f["params"]])
            self.assertEqual(g["result"], f["result"])

    def test_values_equal_direct_answers(self):
        fs = functions()
        calls = [
            ("limit", "VEER.LIMIT", (20.0, None, "gap=1; allowance=0.5"), "value"),
            ("rulecols", "VEER.RULECOLS", ("x > 1.0", (("x",), (0.5,), (2.0,))), "column"),
        ]
        for method, name, args, shape in calls:
            with self.subTest(name):
                got = fs.invoke(method, args)
                want = direct(name, vc.wire_args(params_of(name)["params"], args))
                self.assertIn("value", want)
                self.assertEqual(got, vc.to_calc(want["value"], shape, []))
        self.assertGreater(fs.invoke("limit", (20.0, None, "gap=1")), 0)

    def test_server_errors_become_calc_errors(self):
        fs = functions()
        cases = [
            # (method, args, code, words in the message)
            ("zscore", ("no-such-model", ((30.0,),), ((120.0,),), None, None), "#REF!", "no-such-model"),
            ("limit", (20.0, None, "gap=1; colour=red"), "#VALUE!", "colour"),
        ]
        for method, args, code, words in cases:
            with self.subTest(method=method, code=code):
                name = fs.by_method[method]["name"]
                want = direct(name, vc.wire_args(fs.by_method[method]["params"], args))
                self.assertEqual(want["error"]["code"], code, want)
                got = fs.invoke(method, args)
                v = got if isinstance(got, float) else got[0][0]
                self.assertEqual(vc.error_code_of(v), code)
                table = fs.invoke("errors", (None,))
                self.assertEqual(table[1][1:3], (name, code))
                # The server names the function once; the table shows it in
                # its own column and the message without it.
                self.assertEqual(name + ": " + table[1][3], want["error"]["message"])
                self.assertIn(words, table[1][3])

    def test_write_without_token(self):
        fs = functions(env={"VEER_PORT": str(PORT), "XDG_DATA_HOME": tempfile.mkdtemp()})
        got = fs.invoke("fit", ("m", (("w1",),), ((30.0,),), ((120.0,),), None, None))
        self.assertEqual(vc.error_code_of(got), "#VALUE!")
        self.assertIn("token", fs.invoke("errors", (None,))[1][3])


class Unreachable(unittest.TestCase):
    def test_not_running_is_quick_and_clear(self):
        fs = functions(env={"VEER_PORT": str(DOWN_PORT)})
        t = time.monotonic()
        got = fs.invoke("limit", (20.0, None, "gap=1"))
        self.assertLess(time.monotonic() - t, 2.0)
        self.assertEqual(vc.error_code_of(got), "#N/A")
        col = fs.invoke("rulecols", ("x > 1.0", (("x",), (2.0,))))
        self.assertEqual(vc.error_code_of(col[0][0]), "#N/A")
        msg = fs.invoke("errors", (None,))[1][3]
        self.assertIn("not running", msg)
        self.assertIn("veer serve", msg)
        self.assertIn(str(DOWN_PORT), msg)

    def test_silent_server_times_out(self):
        # A listener that accepts the connection but never answers.
        ln = socket.socket()
        ln.bind(("127.0.0.1", 0))
        ln.listen(4)
        held = []

        def hold():
            try:
                while True:
                    held.append(ln.accept()[0])
            except OSError:
                pass

        threading.Thread(target=hold, daemon=True).start()
        try:
            fs = functions(env={"VEER_PORT": str(ln.getsockname()[1]), "VEER_TIMEOUT": "0.4"})
            t = time.monotonic()
            got = fs.invoke("limit", (20.0, None, "gap=1"))
            took = time.monotonic() - t
            self.assertEqual(vc.error_code_of(got), "#N/A")
            self.assertLess(took, 2.0)
            self.assertGreaterEqual(took, 0.3)
            self.assertIn("did not answer within", fs.invoke("errors", (None,))[1][3])
        finally:
            ln.close()
            for s in held:
                s.close()


class SettingsOrder(unittest.TestCase):
    def test_precedence(self):
        d = tempfile.mkdtemp()
        data = os.path.join(d, "data")
        os.makedirs(os.path.join(data, "veer"))
        with open(os.path.join(data, "veer", "token"), "w") as f:
            f.write("from-token-file\n")
        path = os.path.join(d, "calc.json")
        s = vc.Settings(env={"XDG_DATA_HOME": data}, path=path)
        self.assertEqual(s.port(), 7311)
        self.assertEqual(s.timeout(False), vc.CALL_TIMEOUT)
        # XDG_DATA_HOME is read from the real environment by _data_dir.
        old = os.environ.get("XDG_DATA_HOME")
        os.environ["XDG_DATA_HOME"] = data
        try:
            self.assertEqual(s.token(), "from-token-file")
            with open(path, "w") as f:
                json.dump({"port": 8123, "token": "from-file"}, f)
            self.assertEqual((s.port(), s.token()), (8123, "from-file"))
            time.sleep(0.01)
            with open(path, "w") as f:
                json.dump({"port": 8124, "token": "changed", "timeout": 5}, f)
            self.assertEqual((s.port(), s.token(), s.timeout(True)), (8124, "changed", 5.0), "the file is read again when it changes")
            s2 = vc.Settings(env={"VEER_PORT": "9000", "VEER_TOKEN": "from-env"}, path=path)
            self.assertEqual((s2.port(), s2.token()), (9000, "from-env"))
        finally:
            if old is None:
                del os.environ["XDG_DATA_HOME"]
            else:
                os.environ["XDG_DATA_HOME"] = old

    def test_bad_settings(self):
        d = tempfile.mkdtemp()
        for env, path_text, words in [
            ({"VEER_PORT": "70000"}, None, "VEER_PORT"),
            ({"VEER_PORT": "abc"}, None, "between 1 and 65535"),
            ({}, "{not json", "not valid JSON"),
        ]:
            with self.subTest(words):
                path = os.path.join(d, "calc.json")
                if path_text is not None:
                    with open(path, "w") as f:
                        f.write(path_text)
                elif os.path.exists(path):
                    os.remove(path)
                fs = functions(env=env, path=path)
                got = fs.invoke("limit", (20.0, None, "gap=1"))
                self.assertEqual(vc.error_code_of(got), "#VALUE!")
                self.assertIn(words, fs.invoke("errors", (None,))[1][3])


class Messages(unittest.TestCase):
    def test_table(self):
        log = vc.MessageLog(size=3)
        self.assertEqual(log.table()[1][3], "no errors since LibreOffice started")
        for i in range(5):
            log.add("VEER.X", "#N/A", "m%d" % i)
        log.add("VEER.X", "#N/A", "m4")
        t = log.table()
        self.assertEqual(t[0], ("time", "function", "error", "message", "times"))
        self.assertEqual([r[3] for r in t[1:]], ["m4", "m3", "m2"], "newest first, at most size")
        self.assertEqual(t[1][4], 2.0, "a repeated message is counted, not repeated")

    def test_function_named_once(self):
        log = vc.MessageLog()
        log.add("VEER.ZSCORE", "#NUM!", "VEER.ZSCORE: row 2: age 70 is outside the reference range")
        log.add("VEER.LIMIT", "#N/A", "the veer server is not running")
        t = log.table()
        self.assertEqual((t[2][1], t[2][3]), ("VEER.ZSCORE", "row 2: age 70 is outside the reference range"))
        self.assertEqual(t[1][3], "the veer server is not running")


if __name__ == "__main__":
    unittest.main(verbosity=1)
