package when

import (
	"context"
	"testing"
	"time"
)

func TestLaterEarlier(t *testing.T) {
	a := time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC)
	b := a.Add(time.Second)
	if !Later(a, b).Equal(b) || !Later(b, a).Equal(b) || !Earlier(a, b).Equal(a) || !Earlier(b, a).Equal(a) {
		t.Error("Later/Earlier pick the wrong time")
	}
}

func TestSleep(t *testing.T) {
	if !Sleep(context.Background(), time.Millisecond) {
		t.Error("a short sleep was cut short")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if Sleep(ctx, time.Hour) {
		t.Error("a sleep on an ended context did not end at once")
	}
}
