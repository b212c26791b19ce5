package stream

import (
	"fmt"
	"runtime"
	"runtime/debug"
	"sync/atomic"
)

// Releaser is a Tagger that holds a resource, such as a memory-mapped
// model file. A Tagger given to Switch.Set that is a Releaser is released
// exactly once: after a later Set has replaced it and the last block
// tagged with it has been written (or dropped when Run ended). No Scorer it
// made is used after Release.
type Releaser interface {
	Release()
}

// heldTagger is a Tagger given to a Switch with its reference count: one
// reference is the Switch's while the Tagger is current, one more for every
// block cut with it until the writer is done with that block.
type heldTagger struct {
	t    Tagger
	refs atomic.Int64
}

// release drops one reference and releases the Tagger with the last one.
func (h *heldTagger) release() {
	switch n := h.refs.Add(-1); {
	case n == 0:
		if r, ok := h.t.(Releaser); ok {
			r.Release()
		}
	case n < 0:
		panic("stream: tagger released twice")
	}
}

// FaultError is a memory fault while tagging: a page of the Tagger's
// memory went away under the running pipeline, as when a memory-mapped
// model file is truncated or rewritten in place. Run writes every block
// before the one that faulted, then returns it.
type FaultError struct {
	Addr uintptr // the faulting address
}

func (e *FaultError) Error() string {
	return fmt.Sprintf("the model file changed under the running filter (memory fault at %#x); replace a model file by rename (mv), never by writing it in place", e.Addr)
}

// processSafe runs w.process(b) and turns a memory fault into b.fault, so
// the writer can stop cleanly after the blocks before b. The caller's
// goroutine must have debug.SetPanicOnFault(true); any other panic goes on.
func (w *worker) processSafe(b *block) {
	defer func() {
		r := recover()
		if r == nil {
			return
		}
		if re, ok := r.(runtime.Error); ok {
			if a, ok := re.(interface{ Addr() uintptr }); ok {
				b.fault = &FaultError{Addr: a.Addr()}
				// The Scorer may have been left half-way through a text.
				w.ts, w.sc = nil, nil
				return
			}
		}
		panic(r)
	}()
	w.process(b)
}

// panicOnFault makes a fault in the calling goroutine a panic that
// processSafe can recover, and returns the function that restores the
// previous setting.
func panicOnFault() func() {
	old := debug.SetPanicOnFault(true)
	return func() { debug.SetPanicOnFault(old) }
}
