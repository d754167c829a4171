package record

import (
	"testing"
	"time"
)

// TestSessionOlderVersionsStillRead writes a version 3 session record, cuts it back to the
// layouts of versions 1 and 2 (each version only appends fields), and reads those: files
// written by earlier builds must stay readable, with the fields they lack left empty.
func TestSessionOlderVersionsStillRead(t *testing.T) {
	s := &Session{At: time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC), SoftwareVersion: "0.3.0", ConfigHash: "sha256:aa",
		SensitivityDBFS: -26, SampleRate: 48000, Device: "synthetic", TimeZone: "UTC",
		NodeID: "wendle-cross-07", Site: "Harrowby Lane", Latitude: 52.4, Longitude: -1.5}
	for k := range s.FirstSeq {
		s.FirstSeq[k] = 1 // one-byte uvarints
	}
	b, err := s.AppendBinary(nil)
	if err != nil {
		t.Fatal(err)
	}
	tail3 := 1 + len(s.NodeID) + 1 + len(s.Site) + 8 + 8 // node id, site (length-prefixed), two float64
	tail2 := 1 + (len(s.FirstSeq) - 1)                   // count and first sequence numbers
	v2 := append([]byte{2}, b[1:len(b)-tail3]...)
	v1 := append([]byte{1}, b[1:len(b)-tail3-tail2]...)
	for _, c := range []struct {
		version  byte
		data     []byte
		firstSeq uint64
	}{{2, v2, 1}, {1, v1, 0}} {
		back := new(Session)
		if err := back.UnmarshalBinary(c.data); err != nil {
			t.Fatalf("version %d: %v", c.version, err)
		}
		if back.TimeZone != "UTC" || back.Device != "synthetic" || back.FirstSeq[KindSecond] != c.firstSeq ||
			back.NodeID != "" || back.Site != "" || back.HasLocation() {
			t.Errorf("version %d read as %+v", c.version, back)
		}
	}
	back := new(Session)
	if err := back.UnmarshalBinary(b); err != nil || back.NodeID != s.NodeID || back.Site != s.Site ||
		back.Latitude != 52.4 || back.Longitude != -1.5 {
		t.Errorf("version 3 read as %+v, %v", back, err)
	}
}
