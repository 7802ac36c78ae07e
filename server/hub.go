package server

import (
	"sync"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// watcherBuffer bounds the events waiting for one watcher. A watcher that
// falls behind gets each bench's and the findings' latest state, not every
// change in between (see watcher.push), so a room waits as at most one
// event per bench, and a change to the whole room (its tolerance, its
// policy) queues every bench at once: the bound is far above any room a
// lab sets up (8–30 benches; the grid has 20 × 20 places). Past it the
// watcher is cut off, reconnects and starts from a fresh snapshot, so it
// never shows a stale room without knowing.
const watcherBuffer = 4096

// hub fans bench changes out to the watchers of each session's room.
type hub struct {
	mu       sync.Mutex
	watchers map[uint64]map[*watcher]struct{}
	closed   bool
	// publishMu orders "read state, publish" per session so that watchers
	// see a bench's states in the order they were read from the store.
	publishMu sync.Map // session id → *sync.Mutex
}

// watcher is one room stream's queue of events not sent yet.
type watcher struct {
	mu    sync.Mutex
	queue []*roomEvent
	// waiting: an event's key → its place in queue. Each event is a whole
	// state (a bench's, or the room's findings), so a newer one replaces
	// one not sent yet: a slow dashboard skips to the latest state
	// instead of sending, and drawing, every step.
	waiting map[uint64]int
	// ready holds a token while queue is not empty.
	ready chan struct{}
	// gone is closed when the hub drops the watcher (fell behind, or the
	// server is shutting down).
	gone     chan struct{}
	goneOnce sync.Once
}

func newWatcher() *watcher {
	return &watcher{waiting: map[uint64]int{}, ready: make(chan struct{}, 1), gone: make(chan struct{})}
}

func (w *watcher) drop() { w.goneOnce.Do(func() { close(w.gone) }) }

// push queues events, each in place of the waiting one with the same key
// if there is one; false when the watcher is too far behind to keep.
func (w *watcher) push(evs ...*roomEvent) bool {
	w.mu.Lock()
	defer w.mu.Unlock()
	for _, ev := range evs {
		if i, ok := w.waiting[ev.key]; ok {
			w.queue[i] = ev
			continue
		}
		if len(w.queue) >= watcherBuffer {
			return false
		}
		w.waiting[ev.key] = len(w.queue)
		w.queue = append(w.queue, ev)
	}
	select {
	case w.ready <- struct{}{}:
	default:
	}
	return true
}

// take returns the waiting events in order and empties the queue.
func (w *watcher) take() []*roomEvent {
	w.mu.Lock()
	defer w.mu.Unlock()
	q := w.queue
	w.queue = nil
	clear(w.waiting)
	return q
}

func newHub() *hub { return &hub{watchers: map[uint64]map[*watcher]struct{}{}} }

func (h *hub) subscribe(sessionID uint64) *watcher {
	w := newWatcher()
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		w.drop()
		return w
	}
	if h.watchers[sessionID] == nil {
		h.watchers[sessionID] = map[*watcher]struct{}{}
	}
	h.watchers[sessionID][w] = struct{}{}
	return w
}

func (h *hub) unsubscribe(sessionID uint64, w *watcher) {
	h.mu.Lock()
	defer h.mu.Unlock()
	delete(h.watchers[sessionID], w)
	if len(h.watchers[sessionID]) == 0 {
		delete(h.watchers, sessionID)
	}
}

// sessionLock returns the mutex that orders publications for a session.
func (h *hub) sessionLock(sessionID uint64) *sync.Mutex {
	// Every judge pass asks: a new mutex only for a session without one.
	if m, ok := h.publishMu.Load(sessionID); ok {
		return m.(*sync.Mutex)
	}
	m, _ := h.publishMu.LoadOrStore(sessionID, &sync.Mutex{})
	return m.(*sync.Mutex)
}

// publishBenches sends benches' new states to the watchers of their
// session's room, all in one push per watcher, so that a judge pass wakes
// each stream once. Call it with the session's publish lock held (see
// publish).
func (h *hub) publishBenches(sessionID uint64, states []*pb.BenchState) {
	if len(states) == 0 {
		return
	}
	h.publish(sessionID, func() ([]*roomEvent, error) {
		evs := make([]*roomEvent, len(states))
		for i, st := range states {
			re, err := benchChanged(st)
			if err != nil {
				return nil, err
			}
			evs[i] = re
		}
		return evs, nil
	})
}

// publishFindings sends the room's new findings to its watchers. Call it
// with the session's publish lock held (see publish).
func (h *hub) publishFindings(sessionID uint64, f *pb.RoomFindings) {
	h.publish(sessionID, func() ([]*roomEvent, error) {
		re, err := findingsChanged(f)
		return []*roomEvent{re}, err
	})
}

// publish queues events for every watcher of their session without
// blocking; a watcher too far behind is dropped. The events are encoded
// once for all of them, and not at all when nobody watches. Call it with
// the session's publish lock held: a watcher that subscribes after the
// check for watchers takes its snapshot after this change.
func (h *hub) publish(sessionID uint64, encode func() ([]*roomEvent, error)) {
	h.mu.Lock()
	n := len(h.watchers[sessionID])
	h.mu.Unlock()
	if n == 0 {
		return
	}
	evs, err := encode()
	h.mu.Lock()
	defer h.mu.Unlock()
	for w := range h.watchers[sessionID] {
		if err == nil && w.push(evs...) {
			continue
		}
		// Behind, or the events cannot be sent: the watcher reconnects and
		// starts from a fresh snapshot.
		delete(h.watchers[sessionID], w)
		w.drop()
	}
}

// watchersOf is the number of open streams on one session's room.
func (h *hub) watchersOf(sessionID uint64) int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.watchers[sessionID])
}

// watcherCount is the number of open room streams.
func (h *hub) watcherCount() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	n := 0
	for _, ws := range h.watchers {
		n += len(ws)
	}
	return n
}

// close drops every watcher so open streams end and clients reconnect.
func (h *hub) close() {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.closed = true
	for id, ws := range h.watchers {
		for w := range ws {
			w.drop()
		}
		delete(h.watchers, id)
	}
}
