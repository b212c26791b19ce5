package stream

// field is one key the splicer writes into a record: its name, the name
// encoded as a JSON string, and the value's JSON bytes.
type field struct {
	name string
	key  []byte // JSON string with quotes
	val  []byte
}

// replacement is an existing top-level value to overwrite with field f.
type replacement struct {
	start, end, f int
}

// splicer adds keys to JSON objects without re-encoding them. One splicer
// belongs to one goroutine; its scratch is reused between records.
type splicer struct {
	repl    []replacement
	scratch []byte
}

// splice appends to dst the record rec, a valid JSON object with optional
// surrounding whitespace whose top-level members are members (as
// scanner.validObject lists them), with every field set: a top-level key that is already there (every occurrence, when the
// object repeats it) keeps its place and spelling and gets the new value;
// the others are added, in order, right after the last member's value (after
// the '{' of an empty object), so whitespace before the closing brace and
// after it stays where it was. All other bytes are copied unchanged. At most
// 64 fields.
func (sp *splicer) splice(dst, rec []byte, members []member, fields []field) []byte {
	insert := skipSpace(rec, 0) + 1 // after '{'
	sp.repl = sp.repl[:0]
	for _, m := range members {
		for f := range fields {
			var is bool
			if is, sp.scratch = keyIs(rec[m.keyStart:m.keyEnd], fields[f].name, sp.scratch); is {
				sp.repl = append(sp.repl, replacement{m.valStart, m.valEnd, f})
				break
			}
		}
		insert = m.valEnd
	}
	var present uint64
	prev := 0
	for _, r := range sp.repl {
		dst = append(dst, rec[prev:r.start]...)
		dst = append(dst, fields[r.f].val...)
		prev = r.end
		present |= 1 << r.f
	}
	dst = append(dst, rec[prev:insert]...)
	comma := insert != skipSpace(rec, 0)+1
	for f := range fields {
		if present&(1<<f) != 0 {
			continue
		}
		if comma {
			dst = append(dst, ',')
		}
		comma = true
		dst = append(dst, fields[f].key...)
		dst = append(dst, ':')
		dst = append(dst, fields[f].val...)
	}
	return append(dst, rec[insert:]...)
}
