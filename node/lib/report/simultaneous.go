package report

import (
	"sort"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// Sighting is one node's event within a happening.
type Sighting struct {
	Node  int           // index of the node (into the slices given to Simultaneous)
	Event *record.Event // the node's event
	Delay time.Duration // its start after the happening's first start
}

// Happening is a sound that several nodes saw: events on different nodes whose starts lie
// within a window of the first one's.
type Happening struct {
	Start     time.Time  // the first node's event start
	Sightings []Sighting // one per node, in the order the nodes saw it (by start)
}

// Simultaneous groups the events of several nodes (events[i] are node i's) into happenings:
// walking all events by start, an event not yet taken opens a happening, and every later event
// of another node starting within window of it joins, one event per node (that node's first).
// The window is measured from the happening's first start, not chained from event to event, so
// a busy street does not merge into one endless happening. Only happenings that two or more
// nodes saw are returned, ordered by start.
func Simultaneous(events [][]*record.Event, window time.Duration) []Happening {
	type ev struct {
		node int
		e    *record.Event
	}
	var all []ev
	for i, es := range events {
		for _, e := range es {
			all = append(all, ev{i, e})
		}
	}
	sort.SliceStable(all, func(a, b int) bool {
		if !all[a].e.Start.Equal(all[b].e.Start) {
			return all[a].e.Start.Before(all[b].e.Start)
		}
		return all[a].node < all[b].node
	})
	taken := make([]bool, len(all))
	var out []Happening
	for i := range all {
		if taken[i] {
			continue
		}
		first := all[i].e.Start
		h := Happening{Start: first, Sightings: []Sighting{{Node: all[i].node, Event: all[i].e}}}
		in := map[int]bool{all[i].node: true}
		idx := []int{i}
		for j := i + 1; j < len(all) && all[j].e.Start.Sub(first) <= window; j++ {
			if taken[j] || in[all[j].node] {
				continue
			}
			in[all[j].node] = true
			idx = append(idx, j)
			h.Sightings = append(h.Sightings, Sighting{Node: all[j].node, Event: all[j].e, Delay: all[j].e.Start.Sub(first)})
		}
		if len(h.Sightings) < 2 {
			continue // seen by one node only: no happening
		}
		for _, k := range idx {
			taken[k] = true
		}
		out = append(out, h)
	}
	return out
}
