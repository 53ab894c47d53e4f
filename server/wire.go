package server

import (
	"math"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"

	"veer/functions/cell"
)

// request is one decoded call (or cancel) message.
type request struct {
	id        []byte // raw JSON of the id (number or text); nil when absent
	fn        string
	args      []cell.Value
	subscribe bool
	token     string
	cancel    []byte // raw JSON id of the call to cancel; nil when absent
	// shape is a problem with this message that does not spoil the others
	// in its batch (a field of the wrong type, a ragged range, ...).
	shape *shapeError
}

// shapeError records a bad message; arg >= 0 names the argument, formatted
// once the function (and so the parameter name) is known.
type shapeError struct {
	arg int
	msg string
}

// decodeLimits bound what one frame may hold.
type decodeLimits struct {
	maxBatch int // calls per batch
	maxCells int // cells per call
}

// syntaxError is a frame that is not valid JSON (or holds a number a
// spreadsheet cannot): the whole frame is rejected.
type syntaxError struct {
	msg string
	off int
}

func (e *syntaxError) Error() string {
	return "the request is not valid JSON: " + e.msg + " at byte " + strconv.Itoa(e.off)
}

// decodeRequests decodes a frame holding one call object or a JSON array of
// them (a batch). It is a strict JSON parser (RFC 8259; invalid UTF-8 in
// strings becomes U+FFFD, as in encoding/json) specialised to the request
// shape, so that large ranges decode without reflection. Its results must
// agree with cell.Value.UnmarshalJSON (checked by a fuzz test).
func decodeRequests(data []byte, lim decodeLimits) (reqs []request, batch bool, err error) {
	d := &decoder{data: data, lim: lim}
	defer func() {
		if r := recover(); r != nil {
			se, ok := r.(*syntaxError)
			if !ok {
				panic(r)
			}
			reqs, batch, err = nil, false, se
		}
	}()
	d.ws()
	switch d.peek() {
	case '{':
		reqs = []request{d.message()}
	case '[':
		batch = true
		d.pos++
		reqs = []request{}
		d.ws()
		if d.peek() == ']' {
			d.pos++
			break
		}
		for {
			d.ws()
			if len(reqs) >= lim.maxBatch {
				d.fail("the batch has more than " + strconv.Itoa(lim.maxBatch) + " calls, the limit per frame")
			}
			reqs = grow(reqs)
			if d.peek() == '{' {
				reqs = append(reqs, d.message())
			} else {
				d.skip(0)
				reqs = append(reqs, request{shape: &shapeError{arg: -1, msg: "each call in a batch must be an object like {\"fn\": ..., \"args\": [...]}"}})
			}
			d.ws()
			if d.next() == ']' {
				break
			}
			d.back()
			d.expect(',')
		}
	default:
		d.fail("expected a call object {...} or a batch [...]")
	}
	d.ws()
	if d.pos != len(d.data) {
		d.fail("unexpected data after the request")
	}
	return reqs, batch, nil
}

// grow makes room for one more element, doubling the capacity (append grows
// large slices by only 1.25x, which copies big ranges many times over).
func grow[T any](s []T) []T {
	if len(s) < cap(s) {
		return s
	}
	n := make([]T, len(s), max(2*cap(s), 8))
	copy(n, s)
	return n
}

type decoder struct {
	data  []byte
	pos   int
	lim   decodeLimits
	names map[string]string // function names seen in this frame
	slab  []cell.Value      // arguments of the frame's messages
	cells int               // cells in the current "args"
	shape *shapeError       // first problem in the current "args"
}

func (d *decoder) fail(msg string) {
	panic(&syntaxError{msg: msg, off: d.pos})
}

func (d *decoder) ws() {
	for d.pos < len(d.data) {
		switch d.data[d.pos] {
		case ' ', '\t', '\n', '\r':
			d.pos++
		default:
			return
		}
	}
}

func (d *decoder) peek() byte {
	if d.pos >= len(d.data) {
		d.fail("unexpected end of data")
	}
	return d.data[d.pos]
}

func (d *decoder) next() byte {
	c := d.peek()
	d.pos++
	return c
}

func (d *decoder) back() { d.pos-- }

func (d *decoder) expect(c byte) {
	d.ws()
	if d.peek() != c {
		d.fail("expected '" + string(c) + "'")
	}
	d.pos++
}

func (d *decoder) literal(lit string) {
	if len(d.data)-d.pos < len(lit) || string(d.data[d.pos:d.pos+len(lit)]) != lit {
		d.fail("invalid literal")
	}
	d.pos += len(lit)
}

// message decodes one call object. A field given twice counts once, the
// last time (as with encoding/json); so do its shape problems.
func (d *decoder) message() request {
	var r request
	// Shape problems per field, combined at the end.
	var fields [6]*shapeError
	const (
		fID = iota
		fCancel
		fFn
		fToken
		fSub
		fArgs
	)
	set := func(f int, msg string) { fields[f] = &shapeError{arg: -1, msg: msg} }
	d.expect('{')
	d.ws()
	if d.peek() == '}' {
		d.pos++
		return r
	}
	for {
		d.ws()
		if d.peek() != '"' {
			d.fail("expected a field name")
		}
		key := d.str()
		d.expect(':')
		d.ws()
		switch key {
		case "id":
			fields[fID] = nil
			r.id = d.idValue(func(msg string) { set(fID, msg) }, "id")
		case "cancel":
			fields[fCancel] = nil
			r.cancel = d.idValue(func(msg string) { set(fCancel, msg) }, "cancel")
		case "fn":
			fields[fFn] = nil
			r.fn = ""
			if d.peek() == '"' {
				r.fn = d.name()
			} else {
				d.skip(0)
				set(fFn, "\"fn\" must be the function name as text")
			}
		case "token":
			fields[fToken] = nil
			r.token = ""
			if d.peek() == '"' {
				r.token = d.str()
			} else {
				d.skip(0)
				set(fToken, "\"token\" must be text")
			}
		case "subscribe":
			fields[fSub] = nil
			r.subscribe = false
			switch d.peek() {
			case 't':
				d.literal("true")
				r.subscribe = true
			case 'f':
				d.literal("false")
			default:
				d.skip(0)
				set(fSub, "\"subscribe\" must be true or false")
			}
		case "args":
			fields[fArgs] = nil
			r.args = nil
			switch d.peek() {
			case '[':
				d.shape = nil
				d.cells = 0
				r.args = d.args()
				fields[fArgs] = d.shape
			case 'n':
				d.literal("null")
			default:
				d.skip(0)
				set(fArgs, "\"args\" must be an array of arguments")
			}
		default:
			d.skip(0) // unknown fields are ignored (forward compatibility)
		}
		d.ws()
		if d.next() == '}' {
			break
		}
		d.back()
		d.expect(',')
	}
	for _, f := range fields {
		if f != nil {
			r.shape = f
			break
		}
	}
	return r
}

// idValue reads an id: a number or text (kept as raw JSON), or null.
func (d *decoder) idValue(bad func(string), field string) []byte {
	start := d.pos
	switch c := d.peek(); {
	case c == '"':
		d.str()
	case c == '-' || ('0' <= c && c <= '9'):
		d.number()
	case c == 'n':
		d.literal("null")
		return nil
	default:
		d.skip(0)
		bad("\"" + field + "\" must be a number or text")
		return nil
	}
	if d.pos-start > 256 {
		bad("\"" + field + "\" is longer than 256 bytes")
		return nil
	}
	return d.data[start:d.pos:d.pos] // aliases the frame, which is not reused
}

// args decodes the argument array.
// The arguments of the messages of a frame share chunks of Values (growing
// to 256 per chunk: one allocation per 256 arguments of a batch rather than
// one per message).
func (d *decoder) args() []cell.Value {
	d.expect('[')
	d.ws()
	if d.peek() == ']' {
		d.pos++
		return nil
	}
	start := len(d.slab)
	for i := 0; ; i++ {
		d.ws()
		v := d.arg(i)
		if len(d.slab) == cap(d.slab) {
			// A new chunk; this message's arguments so far move with it.
			n := len(d.slab) - start
			chunk := make([]cell.Value, n, max(2*(n+1), min(256, max(4, 2*cap(d.slab)))))
			copy(chunk, d.slab[start:])
			d.slab, start = chunk, 0
		}
		d.slab = append(d.slab, v)
		d.ws()
		if d.next() == ']' {
			return d.slab[start:len(d.slab):len(d.slab)]
		}
		d.back()
		d.expect(',')
	}
}

func (d *decoder) setShape(arg int, msg string) {
	if d.shape == nil {
		d.shape = &shapeError{arg: arg, msg: msg}
	}
}

// countCells counts n more cells against the limit.
func (d *decoder) countCells(n int) bool {
	d.cells += n
	if d.cells > d.lim.maxCells {
		d.setShape(-1, "the call has more than "+strconv.Itoa(d.lim.maxCells)+" cells, the limit per call")
		return false
	}
	return true
}

// arg decodes one argument: a cell, a flat array (one column) or an array
// of rows.
func (d *decoder) arg(i int) cell.Value {
	if d.peek() != '[' {
		c, msg := d.cell()
		if msg != "" {
			d.setShape(i, msg)
		}
		d.countCells(1)
		return cell.ScalarValue(c)
	}
	d.pos++
	d.ws()
	if d.peek() == ']' {
		d.pos++
		v, _ := cell.RangeValue(nil)
		return v
	}
	if d.peek() != '[' {
		// One column.
		var cells []cell.Cell
		ok := true
		for k := 0; ; k++ {
			d.ws()
			if d.peek() == '[' {
				d.skip(0)
				d.setShape(i, "the array mixes single cells and rows (element "+strconv.Itoa(k+1)+" is a row, element 1 is a cell)")
				ok = false
			} else {
				c, msg := d.cell()
				if msg != "" {
					d.setShape(i, "row "+strconv.Itoa(k+1)+": "+msg)
					ok = false
				}
				if ok && d.countCells(1) {
					cells = append(grow(cells), c)
				} else {
					ok = false
				}
			}
			d.ws()
			if d.next() == ']' {
				break
			}
			d.back()
			d.expect(',')
		}
		if !ok {
			return cell.Value{}
		}
		return cell.ColumnValue(cells)
	}
	// Rows: cells collected flat, then sliced into rows.
	var flat []cell.Cell
	var lens []int
	ok := true
	for k := 0; ; k++ {
		d.ws()
		if d.peek() != '[' {
			d.skip(0)
			d.setShape(i, "the array mixes rows and single cells (element "+strconv.Itoa(k+1)+" is a cell, element 1 is a row)")
			ok = false
		} else {
			d.pos++
			n := 0
			d.ws()
			if d.peek() == ']' {
				d.pos++
			} else {
				for j := 0; ; j++ {
					d.ws()
					if d.peek() == '[' {
						d.skip(0)
						d.setShape(i, "row "+strconv.Itoa(k+1)+", column "+strconv.Itoa(j+1)+": arrays nest at most two deep (rows of cells)")
						ok = false
					} else {
						c, msg := d.cell()
						if msg != "" {
							d.setShape(i, "row "+strconv.Itoa(k+1)+", column "+strconv.Itoa(j+1)+": "+msg)
							ok = false
						}
						if ok && d.countCells(1) {
							flat = append(grow(flat), c)
							n++
						} else {
							ok = false
						}
					}
					d.ws()
					if d.next() == ']' {
						break
					}
					d.back()
					d.expect(',')
				}
			}
			lens = append(lens, n)
		}
		d.ws()
		if d.next() == ']' {
			break
		}
		d.back()
		d.expect(',')
	}
	if !ok {
		return cell.Value{}
	}
	cols := -1
	for k, n := range lens {
		if cols < 0 {
			cols = n
		} else if n != cols {
			d.setShape(i, "the range is not rectangular: row "+strconv.Itoa(k+1)+" has "+strconv.Itoa(n)+" cells but row 1 has "+strconv.Itoa(cols))
			return cell.Value{}
		}
	}
	v, err := cell.BlockValue(flat, len(lens), cols)
	if err != nil {
		d.setShape(i, err.(*cell.Error).Message)
		return cell.Value{}
	}
	return v
}

// cell decodes one scalar cell; msg is non-empty for a well-formed JSON
// value that is not a cell.
func (d *decoder) cell() (cell.Cell, string) {
	switch c := d.peek(); {
	case c == '"':
		return cell.TextCell(d.str()), ""
	case c == '-' || ('0' <= c && c <= '9'):
		return cell.NumberCell(d.number()), ""
	case c == 't':
		d.literal("true")
		return cell.BoolCell(true), ""
	case c == 'f':
		d.literal("false")
		return cell.BoolCell(false), ""
	case c == 'n':
		d.literal("null")
		return cell.Cell{}, ""
	case c == '{':
		return d.errorObject()
	}
	d.fail("expected a value")
	return cell.Cell{}, ""
}

// errorObject decodes {"error": "#N/A", "message": "..."}; the same rules as
// cell.Value.UnmarshalJSON: "error" must be text, "message" text if given,
// no other fields; the last of duplicate fields counts.
func (d *decoder) errorObject() (cell.Cell, string) {
	d.pos++ // '{'
	var code string
	codeKind, msgKind := byte(0), byte(0) // 0 absent, 's' text, 'x' other
	extra, hasExtra := "", false
	d.ws()
	if d.peek() != '}' {
		for {
			d.ws()
			if d.peek() != '"' {
				d.fail("expected a field name")
			}
			key := d.str()
			d.expect(':')
			d.ws()
			switch key {
			case "error", "message":
				kind := byte('x')
				var s string
				if d.peek() == '"' {
					s = d.str()
					kind = 's'
				} else {
					d.skip(1)
				}
				if key == "error" {
					code, codeKind = s, kind
				} else {
					msgKind = kind
				}
			default:
				d.skip(1)
				if !hasExtra {
					extra, hasExtra = key, true
				}
			}
			d.ws()
			if d.next() == '}' {
				break
			}
			d.back()
			d.expect(',')
		}
	} else {
		d.pos++
	}
	switch {
	case codeKind != 's':
		return cell.Cell{}, `an object in a cell must be an error value like {"error": "#N/A"}`
	case hasExtra:
		return cell.Cell{}, `an error value has only "error" and "message" fields, not ` + strconv.Quote(extra)
	case msgKind == 'x':
		return cell.Cell{}, `the "message" of an error value must be text`
	}
	return cell.ErrorCell(code), ""
}

// skip skips any JSON value, checking its syntax.
func (d *decoder) skip(depth int) {
	if depth > 64 {
		d.fail("the request nests too deep")
	}
	d.ws()
	switch c := d.peek(); {
	case c == '"':
		d.str()
	case c == '-' || ('0' <= c && c <= '9'):
		d.number()
	case c == 't':
		d.literal("true")
	case c == 'f':
		d.literal("false")
	case c == 'n':
		d.literal("null")
	case c == '[':
		d.pos++
		d.ws()
		if d.peek() == ']' {
			d.pos++
			return
		}
		for {
			d.skip(depth + 1)
			d.ws()
			if d.next() == ']' {
				return
			}
			d.back()
			d.expect(',')
		}
	case c == '{':
		d.pos++
		d.ws()
		if d.peek() == '}' {
			d.pos++
			return
		}
		for {
			d.ws()
			if d.peek() != '"' {
				d.fail("expected a field name")
			}
			d.str()
			d.expect(':')
			d.skip(depth + 1)
			d.ws()
			if d.next() == '}' {
				return
			}
			d.back()
			d.expect(',')
		}
	default:
		d.fail("expected a value")
	}
}

// number parses a JSON number; numbers a float64 cannot hold are rejected.
// The grammar (RFC 8259) is checked here, because strconv.ParseFloat also
// accepts forms JSON does not ("+1", ".5", "1_000", "0x1p3", "Inf"); the
// value is strconv.ParseFloat's (correctly rounded).
func (d *decoder) number() float64 {
	start := d.pos
	p := d.pos
	data := d.data
	digits := func() {
		for p < len(data) && '0' <= data[p] && data[p] <= '9' {
			p++
		}
	}
	invalid := func() {
		d.pos = p
		d.fail("invalid number")
	}
	if p < len(data) && data[p] == '-' {
		p++
	}
	switch {
	case p >= len(data):
		invalid()
	case data[p] == '0':
		p++
	case '1' <= data[p] && data[p] <= '9':
		digits()
	default:
		invalid()
	}
	if p < len(data) && data[p] == '.' {
		p++
		if p >= len(data) || data[p] < '0' || data[p] > '9' {
			invalid()
		}
		digits()
	}
	if p < len(data) && (data[p] == 'e' || data[p] == 'E') {
		p++
		if p < len(data) && (data[p] == '+' || data[p] == '-') {
			p++
		}
		if p >= len(data) || data[p] < '0' || data[p] > '9' {
			invalid()
		}
		digits()
	}
	d.pos = p
	b := data[start:p]
	f, err := strconv.ParseFloat(string(b), 64) // the conversion does not allocate: the string does not escape
	if err != nil || math.IsInf(f, 0) {
		d.pos = start
		d.fail("the number " + string(b) + " is out of range")
	}
	return f
}

// name parses a string that repeats across a batch (a function name),
// reusing one copy per frame.
func (d *decoder) name() string {
	start := d.pos
	if d.names != nil {
		for p := start + 1; p < len(d.data); p++ {
			c := d.data[p]
			if c == '"' {
				if n, ok := d.names[string(d.data[start:p+1])]; ok {
					d.pos = p + 1
					return n
				}
				break
			}
			if c == '\\' || c < 0x20 || c >= 0x80 {
				break
			}
		}
	}
	s := d.str()
	raw := d.data[start:d.pos]
	if n, ok := d.names[string(raw)]; ok {
		return n
	}
	if d.names == nil {
		d.names = map[string]string{}
	}
	if len(d.names) < 64 {
		d.names[string(raw)] = s
	}
	return s
}

// str parses a JSON string at the current position.
func (d *decoder) str() string {
	d.pos++ // opening quote
	start := d.pos
	data := d.data
	p := start
	ascii := true
	for p < len(data) {
		c := data[p]
		if c == '"' {
			s := data[start:p]
			d.pos = p + 1
			if ascii || utf8.Valid(s) {
				return string(s)
			}
			return d.strSlow(start, p)
		}
		if c == '\\' {
			return d.strSlow(start, -1)
		}
		if c < 0x20 {
			d.pos = p
			d.fail("control character in a string")
		}
		if c >= utf8.RuneSelf {
			ascii = false
		}
		p++
	}
	d.pos = p
	d.fail("unterminated string")
	return ""
}

// strSlow decodes a string with escapes or invalid UTF-8 from start (just
// after the opening quote). If end >= 0 the string is known to end there.
func (d *decoder) strSlow(start, end int) string {
	data := d.data
	buf := make([]byte, 0, 16)
	p := start
	for {
		if p >= len(data) {
			d.pos = p
			d.fail("unterminated string")
		}
		c := data[p]
		switch {
		case c == '"':
			d.pos = p + 1
			return string(buf)
		case c == '\\':
			p++
			if p >= len(data) {
				d.pos = p
				d.fail("unterminated string")
			}
			switch data[p] {
			case '"', '\\', '/':
				buf = append(buf, data[p])
				p++
			case 'b':
				buf = append(buf, '\b')
				p++
			case 'f':
				buf = append(buf, '\f')
				p++
			case 'n':
				buf = append(buf, '\n')
				p++
			case 'r':
				buf = append(buf, '\r')
				p++
			case 't':
				buf = append(buf, '\t')
				p++
			case 'u':
				r := d.hex4(p + 1)
				p += 5
				if utf16.IsSurrogate(r) {
					r2 := rune(-1)
					if p+1 < len(data) && data[p] == '\\' && data[p+1] == 'u' {
						r2 = d.hex4(p + 2)
					}
					if dec := utf16.DecodeRune(r, r2); dec != utf8.RuneError {
						p += 6
						r = dec
					} else {
						r = utf8.RuneError
					}
				}
				buf = utf8.AppendRune(buf, r)
			default:
				d.pos = p
				d.fail("invalid escape in a string")
			}
		case c < 0x20:
			d.pos = p
			d.fail("control character in a string")
		case c < utf8.RuneSelf:
			buf = append(buf, c)
			p++
		default:
			r, size := utf8.DecodeRune(data[p:])
			if r == utf8.RuneError && size == 1 {
				buf = utf8.AppendRune(buf, utf8.RuneError)
			} else {
				buf = append(buf, data[p:p+size]...)
			}
			p += size
		}
	}
}

func (d *decoder) hex4(p int) rune {
	if p+4 > len(d.data) {
		d.pos = p
		d.fail("invalid \\u escape")
	}
	var r rune
	for _, c := range d.data[p : p+4] {
		r <<= 4
		switch {
		case '0' <= c && c <= '9':
			r |= rune(c - '0')
		case 'a' <= c && c <= 'f':
			r |= rune(c - 'a' + 10)
		case 'A' <= c && c <= 'F':
			r |= rune(c - 'A' + 10)
		default:
			d.pos = p
			d.fail("invalid \\u escape")
		}
	}
	return r
}

// answer encoding

// appendAnswer appends one answer object: {"id":..,"value":..} or
// {"id":..,"error":{"code":..,"message":..}}, with "update":true for a
// streaming update.
func appendAnswer(b []byte, id []byte, val []byte, e *cell.Error, update bool) []byte {
	b = append(b, '{')
	if id != nil {
		b = append(b, `"id":`...)
		b = append(b, id...)
		b = append(b, ',')
	}
	if e != nil {
		b = append(b, `"error":{"code":`...)
		b = cell.AppendString(b, string(e.Code))
		b = append(b, `,"message":`...)
		b = cell.AppendString(b, e.Message)
		b = append(b, '}')
	} else {
		b = append(b, `"value":`...)
		b = append(b, val...)
	}
	if update {
		b = append(b, `,"update":true`...)
	}
	return append(b, '}')
}

func appendProgress(b []byte, id []byte, p float64) []byte {
	b = append(b, `{"id":`...)
	b = append(b, id...)
	b = append(b, `,"progress":`...)
	b = strconv.AppendFloat(b, math.Round(p*1000)/1000, 'f', -1, 64)
	return append(b, '}')
}

func appendCancelled(b []byte, id []byte, ok bool) []byte {
	b = append(b, `{"id":`...)
	b = append(b, id...)
	b = append(b, `,"cancelled":`...)
	b = strconv.AppendBool(b, ok)
	return append(b, '}')
}
