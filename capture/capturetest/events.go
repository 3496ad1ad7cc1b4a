package capturetest

import (
	"sync"

	"github.com/hewline/hewline/capture/v4l2"
)

// EventLog collects a Supervisor's events: pass its Add as
// v4l2.Options.OnEvent. Safe for the Supervisor's goroutines.
type EventLog struct {
	mu     sync.Mutex
	events []v4l2.Event
}

// Add records e.
func (l *EventLog) Add(e v4l2.Event) {
	l.mu.Lock()
	l.events = append(l.events, e)
	l.mu.Unlock()
}

// Kinds returns the kinds of the events so far, in order, keeping only
// the given kinds when any are given.
func (l *EventLog) Kinds(only ...v4l2.EventKind) []v4l2.EventKind {
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []v4l2.EventKind
	for _, e := range l.events {
		if keep(e.Kind, only) {
			out = append(out, e.Kind)
		}
	}
	return out
}

// Of returns the events of kind k so far, in order.
func (l *EventLog) Of(k v4l2.EventKind) []v4l2.Event {
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []v4l2.Event
	for _, e := range l.events {
		if e.Kind == k {
			out = append(out, e)
		}
	}
	return out
}

func keep(k v4l2.EventKind, only []v4l2.EventKind) bool {
	if len(only) == 0 {
		return true
	}
	for _, o := range only {
		if o == k {
			return true
		}
	}
	return false
}
