package publish

// spans is a sorted set of disjoint, non-adjacent inclusive sequence ranges: the records
// delivered above a stream's cursor, held in memory only.
type spans []span

type span struct{ lo, hi uint64 }

// add inserts [lo, hi] and merges overlapping or adjacent ranges.
func (s spans) add(lo, hi uint64) spans {
	if hi < lo {
		return s
	}
	out := s[:0:0]
	placed := false
	for _, r := range s {
		switch {
		case r.hi+1 < lo:
			out = append(out, r)
		case hi+1 < r.lo:
			if !placed {
				out = append(out, span{lo, hi})
				placed = true
			}
			out = append(out, r)
		default:
			lo, hi = min(lo, r.lo), max(hi, r.hi)
		}
	}
	if !placed {
		out = append(out, span{lo, hi})
		// keep order: the new span goes after every range below it
		for i := len(out) - 1; i > 0 && out[i-1].lo > out[i].lo; i-- {
			out[i-1], out[i] = out[i], out[i-1]
		}
	}
	return out
}

// contains reports whether seq lies in a range of s.
func (s spans) contains(seq uint64) bool {
	for _, r := range s {
		if seq < r.lo {
			return false
		}
		if seq <= r.hi {
			return true
		}
	}
	return false
}

// advance returns the cursor moved over every range that starts at or below cursor+1, and s
// without those ranges.
func (s spans) advance(cursor uint64) (uint64, spans) {
	i := 0
	for ; i < len(s) && s[i].lo <= cursor+1; i++ {
		cursor = max(cursor, s[i].hi)
	}
	return cursor, s[i:]
}
