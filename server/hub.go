package server

import (
	"sync"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// watcherBuffer is how many bench changes a slow watcher may fall behind
// before it is cut off; it then reconnects and starts from a fresh snapshot,
// so it never shows a stale room without knowing.
const watcherBuffer = 256

// hub fans bench changes out to the watchers of each session's room.
type hub struct {
	mu       sync.Mutex
	watchers map[uint64]map[*watcher]struct{}
	closed   bool
	// publishMu orders "read state, publish" per session so that watchers
	// see a bench's states in the order they were read from the store.
	publishMu sync.Map // session id → *sync.Mutex
}

type watcher struct {
	ch chan *roomEvent
	// gone is closed when the hub drops the watcher (fell behind, or the
	// server is shutting down).
	gone     chan struct{}
	goneOnce sync.Once
}

func (w *watcher) drop() { w.goneOnce.Do(func() { close(w.gone) }) }

func newHub() *hub { return &hub{watchers: map[uint64]map[*watcher]struct{}{}} }

func (h *hub) subscribe(sessionID uint64) *watcher {
	w := &watcher{ch: make(chan *roomEvent, watcherBuffer), gone: make(chan struct{})}
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
	m, _ := h.publishMu.LoadOrStore(sessionID, &sync.Mutex{})
	return m.(*sync.Mutex)
}

// publish sends an event (a bench's new state, or the room's findings) to
// every watcher of its session without blocking; a watcher whose buffer is
// full is dropped. The event is encoded once for all of them, and not at
// all when nobody watches; each stream adds its sequence number. Call it
// with the session's publish lock held: a watcher that subscribes after the
// check for watchers takes its snapshot after this change.
func (h *hub) publish(sessionID uint64, ev *pb.WatchRoomResponse) {
	h.mu.Lock()
	n := len(h.watchers[sessionID])
	h.mu.Unlock()
	if n == 0 {
		return
	}
	re, err := newRoomEvent(ev)
	h.mu.Lock()
	defer h.mu.Unlock()
	for w := range h.watchers[sessionID] {
		if err == nil {
			select {
			case w.ch <- re:
				continue
			default:
			}
		}
		// Behind, or the event cannot be sent: the watcher reconnects and
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
