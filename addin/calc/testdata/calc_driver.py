# Drives a headless LibreOffice Calc for the Calc extension's end-to-end
# test (cmd/veer TestCalcExtensionInLibreOffice). Run with Debian's python3,
# whose python3-uno makes `import uno` work:
#
#   /usr/bin/python3 calc_driver.py PORT
#
# PORT is where soffice listens (--accept=socket,host=127.0.0.1,port=PORT;urp;).
# Commands come on stdin, one JSON object a line; each answer is one JSON
# line on stdout: {"ok": true, ...} or {"ok": false, "error": "..."}.
#
#   {"cmd": "load", "path": "/abs/book.ods"}       open a workbook (hidden)
#   {"cmd": "new"}                                  a new, empty workbook
#   {"cmd": "set", "sheet": "Sheet1", "data": [{"range": "A1:B2", "rows": [[..]]}],
#          "formulas": [{"cell": "C1", "formula": "=.."}],
#          "arrays": [{"range": "D1:D9", "formula": "=.."}]}
#   {"cmd": "recalc"}                               calculateAll, timed
#   {"cmd": "read", "sheet": "Sheet1", "range": "A1:B2"}
#   {"cmd": "veer"}                                 every VEER formula block with
#                                                   its arguments resolved and its values
#   {"cmd": "functions"}                            Calc's function list entries for VEER.*
#   {"cmd": "close"} / {"cmd": "quit"}

import json
import re
import sys
import time
import traceback

import uno
from com.sun.star.beans import PropertyValue

PORT = int(sys.argv[1])


def pv(name, value):
    p = PropertyValue()
    p.Name = name
    p.Value = value
    return p


def connect():
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    deadline = time.monotonic() + 90
    while True:
        try:
            return resolver.resolve("uno:socket,host=127.0.0.1,port=%d;urp;StarOffice.ComponentContext" % PORT)
        except Exception:
            if time.monotonic() > deadline:
                raise
            time.sleep(0.2)


ctx = connect()
smgr = ctx.ServiceManager
desktop = smgr.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
doc = None


def close_doc():
    global doc
    if doc is not None:
        try:
            doc.close(True)
        except Exception:
            pass
        doc = None


def sheet(name):
    if name is None:
        return doc.Sheets.getByIndex(0)
    return doc.Sheets.getByName(name)


def cell_values(rng):
    """Values of a range with the error code of each error cell."""
    rows = rng.getDataArray()
    errors = {}
    for r, row in enumerate(rows):
        for c, v in enumerate(row):
            if v is None:  # getDataArray gives void for an error cell
                errors["%d,%d" % (r, c)] = rng.getCellByPosition(c, r).getError()
    return [list(row) for row in rows], errors


REF = re.compile(r"^(?:\$?'?([^'.]+?)'?\.)?(\$?[A-Z]+\$?[0-9]+)(?::\$?(?:'?[^'.]+?'?\.)?(\$?[A-Z]+\$?[0-9]+))?$")


def split_args(s):
    """Splits the argument text of a call at top-level separators (the API's
    English formulas use commas, the UI semicolons)."""
    out, depth, cur, i, quote = [], 0, "", 0, False
    while i < len(s):
        ch = s[i]
        if quote:
            cur += ch
            if ch == '"':
                if i + 1 < len(s) and s[i + 1] == '"':
                    cur += '"'
                    i += 1
                else:
                    quote = False
        elif ch == '"':
            quote = True
            cur += ch
        elif ch in "([{":
            depth += 1
            cur += ch
        elif ch in ")]}":
            depth -= 1
            cur += ch
        elif ch in ";," and depth == 0:
            out.append(cur)
            cur = ""
        else:
            cur += ch
        i += 1
    out.append(cur)
    return out


def resolve(arg, own_sheet):
    a = arg.strip()
    if a == "":
        return {"kind": "missing", "text": arg}
    if a.startswith('"') and a.endswith('"'):
        return {"kind": "text", "value": a[1:-1].replace('""', '"'), "text": arg}
    if a.upper() in ("TRUE()", "FALSE()", "TRUE", "FALSE"):
        return {"kind": "bool", "value": a.upper().startswith("TRUE"), "text": arg}
    try:
        return {"kind": "number", "value": float(a), "text": arg}
    except ValueError:
        pass
    m = REF.match(a)
    if m:
        sh = m.group(1) or own_sheet
        addr = m.group(2).replace("$", "")
        if m.group(3):
            addr += ":" + m.group(3).replace("$", "")
        rng = doc.Sheets.getByName(sh).getCellRangeByName(addr)
        rows, errors = cell_values(rng)
        return {"kind": "ref", "sheet": sh, "range": addr, "rows": rows, "errors": errors, "text": arg}
    return {"kind": "unsupported", "text": arg}


def veer_blocks():
    """Every VEER formula: its block (the array range, or the one cell), its
    formula, arguments resolved to cell values, and the values Calc shows."""
    from com.sun.star.sheet.CellFlags import FORMULA
    out = []
    for si in range(doc.Sheets.Count):
        sh = doc.Sheets.getByIndex(si)
        done = set()
        ranges = sh.queryContentCells(FORMULA)
        for addr in ranges.getRangeAddresses():
            rng = sh.getCellRangeByPosition(addr.StartColumn, addr.StartRow, addr.EndColumn, addr.EndRow)
            formulas = rng.getFormulaArray()
            for r, row in enumerate(formulas):
                for c, f in enumerate(row):
                    if "VEER." not in f.upper():
                        continue
                    col, rw = addr.StartColumn + c, addr.StartRow + r
                    if (col, rw) in done:
                        continue
                    cell = sh.getCellByPosition(col, rw)
                    block, array = cell, False
                    if cell.getArrayFormula():
                        cursor = sh.createCursorByRange(cell)
                        cursor.collapseToCurrentArray()
                        block, array = cursor, True
                    ba = block.getRangeAddress()
                    for cc in range(ba.StartColumn, ba.EndColumn + 1):
                        for rr in range(ba.StartRow, ba.EndRow + 1):
                            done.add((cc, rr))
                    text = block.getArrayFormula() if array else cell.getFormula()
                    text = text.strip()
                    if text.startswith("{") and text.endswith("}"):
                        text = text[1:-1]
                    m = re.match(r"^=\s*(VEER\.[A-Z0-9_.]+)\((.*)\)\s*$", text, re.I | re.S)
                    item = {"sheet": sh.Name, "formula": text, "array": array,
                            "range": block.AbsoluteName, "row": ba.StartRow, "col": ba.StartColumn,
                            "rows": ba.EndRow - ba.StartRow + 1, "cols": ba.EndColumn - ba.StartColumn + 1}
                    if m:
                        item["fn"] = m.group(1).upper()
                        args = split_args(m.group(2)) if m.group(2).strip() else []
                        item["args"] = [resolve(a, sh.Name) for a in args]
                    values, errors = cell_values(block)
                    item["values"], item["errors"] = values, errors
                    out.append(item)
    return out


def function_list():
    """The VEER entries of Calc's function list (what the Function Wizard shows)."""
    fl = smgr.createInstanceWithContext("com.sun.star.sheet.FunctionDescriptions", ctx)
    out = []
    for i in range(fl.Count):
        props = dict((p.Name, p.Value) for p in fl.getByIndex(i))
        name = props.get("Name", "")
        if name.upper().startswith("VEER."):
            args = [{"name": a.Name, "description": a.Description, "optional": a.IsOptional} for a in (props.get("Arguments") or ())]
            out.append({"name": name, "description": props.get("Description", ""), "category": props.get("Category"), "arguments": args})
    return out


def handle(msg):
    global doc
    cmd = msg["cmd"]
    if cmd == "load":
        close_doc()
        t = time.monotonic()
        url = uno.systemPathToFileUrl(msg["path"])
        doc = desktop.loadComponentFromURL(url, "_blank", 0, (pv("Hidden", True),))
        if doc is None:
            raise RuntimeError("LibreOffice could not open " + msg["path"])
        return {"seconds": time.monotonic() - t}
    if cmd == "new":
        close_doc()
        doc = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, (pv("Hidden", True),))
        return {}
    if cmd == "set":
        sh = sheet(msg.get("sheet"))
        for d in msg.get("data", []):
            sh.getCellRangeByName(d["range"]).setDataArray(tuple(tuple(r) for r in d["rows"]))
        for f in msg.get("formulas", []):
            sh.getCellRangeByName(f["cell"]).setFormula(f["formula"])
        for a in msg.get("arrays", []):
            sh.getCellRangeByName(a["range"]).setArrayFormula(a["formula"])
        return {}
    if cmd == "recalc":
        t = time.monotonic()
        doc.calculateAll()
        return {"seconds": time.monotonic() - t}
    if cmd == "read":
        values, errors = cell_values(sheet(msg.get("sheet")).getCellRangeByName(msg["range"]))
        return {"values": values, "errors": errors}
    if cmd == "veer":
        return {"blocks": veer_blocks()}
    if cmd == "functions":
        return {"functions": function_list()}
    if cmd == "close":
        close_doc()
        return {}
    if cmd == "quit":
        close_doc()
        try:
            desktop.terminate()
        except Exception:
            pass  # the connection drops as soffice exits
        return {}
    raise ValueError("unknown command " + cmd)


def main():
    for line in sys.stdin:
        line = line.strip()
        if not line:
            continue
        msg = {}
        try:
            msg = json.loads(line)
            ans = handle(msg)
            ans["ok"] = True
        except Exception as e:
            ans = {"ok": False, "error": "%s: %s" % (e.__class__.__name__, e), "trace": traceback.format_exc()}
        sys.stdout.write(json.dumps(ans) + "\n")
        sys.stdout.flush()
        if msg.get("cmd") == "quit":
            return


main()
