package published

// oneLineLeaves rewrites indented JSON (as json.MarshalIndent writes it)
// so that every array or object holding no other array or object sits on
// one line: a lookup row is "[18, 0.0123]" and a term is {"term": "1",
// "coef": 1.5}, so a document reads like the tables it holds. It relies
// on MarshalIndent's layout (newline plus indentation between elements,
// none inside strings).
func oneLineLeaves(in []byte) []byte {
	out := make([]byte, 0, len(in))
	type frame struct {
		start  int
		nested bool
	}
	var stack []frame
	inString, escaped := false, false
	for _, c := range in {
		if inString {
			out = append(out, c)
			switch {
			case escaped:
				escaped = false
			case c == '\\':
				escaped = true
			case c == '"':
				inString = false
			}
			continue
		}
		switch c {
		case '"':
			inString = true
			out = append(out, c)
		case '[', '{':
			if n := len(stack); n > 0 {
				stack[n-1].nested = true
			}
			stack = append(stack, frame{start: len(out)})
			out = append(out, c)
		case ']', '}':
			out = append(out, c)
			f := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			if !f.nested {
				out = append(out[:f.start], squeeze(out[f.start:])...)
			}
		default:
			out = append(out, c)
		}
	}
	return out
}

// squeeze removes the newlines and indentation of one leaf container,
// leaving a space after each comma.
func squeeze(b []byte) []byte {
	out := make([]byte, 0, len(b))
	inString, escaped, skip := false, false, false
	for _, c := range b {
		if inString {
			out = append(out, c)
			switch {
			case escaped:
				escaped = false
			case c == '\\':
				escaped = true
			case c == '"':
				inString = false
			}
			continue
		}
		if skip && (c == ' ' || c == '\t') {
			continue
		}
		skip = false
		switch c {
		case '\n':
			skip = true
			if n := len(out); n > 0 && out[n-1] == ',' {
				out = append(out, ' ')
			}
		case '"':
			inString = true
			out = append(out, c)
		default:
			out = append(out, c)
		}
	}
	return out
}
