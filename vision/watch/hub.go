package watch

import "sync"

// hub hands each encoded event to every connected browser. Each browser
// has a mailbox of one event: a newer event replaces one not yet taken,
// so a slow browser skips frames and nothing queues up.
type hub struct {
	mu   sync.Mutex
	subs map[*subscriber]struct{}
	max  int
}

type subscriber struct {
	ch chan []byte
}

func (h *hub) init(max int) {
	h.subs = map[*subscriber]struct{}{}
	h.max = max
}

// join adds a browser, or returns false when max are connected.
func (h *hub) join() (*subscriber, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if len(h.subs) >= h.max {
		return nil, false
	}
	s := &subscriber{ch: make(chan []byte, 1)}
	h.subs[s] = struct{}{}
	return s, true
}

func (h *hub) leave(s *subscriber) {
	h.mu.Lock()
	delete(h.subs, s)
	h.mu.Unlock()
}

// count is the number of connected browsers.
func (h *hub) count() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.subs)
}

// publish offers msg to every browser without ever blocking.
func (h *hub) publish(msg []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	for s := range h.subs {
		select {
		case s.ch <- msg:
			continue
		default:
		}
		// Mailbox full: drop the old event, offer the new one.
		select {
		case <-s.ch:
		default:
		}
		select {
		case s.ch <- msg:
		default:
		}
	}
}
