package stream

// reorder puts blocks back in sequence. It is a ring of window slots
// indexed by sequence number: since at most window blocks exist at once,
// the blocks in flight have sequence numbers in [next, next+window) and
// never share a slot.
type reorder struct {
	ring []*block
	next uint64
}

func newReorder(window int) *reorder { return &reorder{ring: make([]*block, window)} }

// put parks b until its turn.
func (r *reorder) put(b *block) { r.ring[b.seq%uint64(len(r.ring))] = b }

// pop returns the next block in sequence, or nil when it has not arrived.
func (r *reorder) pop() *block {
	i := r.next % uint64(len(r.ring))
	b := r.ring[i]
	if b == nil || b.seq != r.next {
		return nil
	}
	r.ring[i] = nil
	r.next++
	return b
}
