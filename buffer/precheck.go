package buffer

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"io/fs"
	"os"
)

// bbolt maps the file into memory and trusts its meta page: a file cut short (a card or a file
// system repair can do that) makes it touch pages beyond the end of the file, and the process
// dies of SIGBUS, which no recover can catch. precheck reads the two meta pages the way bbolt
// does and refuses, as damaged, a file whose valid meta page names pages the file does not hold.
//
// Meta page layout (go.etcd.io/bbolt internal/common/meta.go, format version 2), after the
// 16-byte page header, in native byte order: magic, version, page size, flags (4 bytes each),
// root bucket (16), freelist page id, high-water page id, transaction id, FNV-64a checksum of
// the preceding 56 bytes (8 each).
const (
	boltMagic      = 0xED0CDAED
	boltVersion    = 2
	pageHeaderSize = 16
	metaSize       = 64
)

type boltMeta struct {
	pageSize uint32
	pgid     uint64
	txid     uint64
}

func parseMeta(b []byte) (boltMeta, bool) {
	if len(b) < metaSize {
		return boltMeta{}, false
	}
	ne := binary.NativeEndian
	if ne.Uint32(b[0:]) != boltMagic || ne.Uint32(b[4:]) != boltVersion {
		return boltMeta{}, false
	}
	h := fnv.New64a()
	h.Write(b[:56])
	if h.Sum64() != ne.Uint64(b[56:]) {
		return boltMeta{}, false
	}
	return boltMeta{pageSize: ne.Uint32(b[8:]), pgid: ne.Uint64(b[40:]), txid: ne.Uint64(b[48:])}, true
}

// precheck returns an error wrapping ErrDamaged when the file at path exists, is not empty,
// and has no valid meta page or is shorter than its valid meta page says.
func precheck(path string) error {
	f, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	defer func() { _ = f.Close() }() // read only: a failing Close loses nothing
	fi, err := f.Stat()
	if err != nil {
		return err
	}
	size := fi.Size()
	if size == 0 {
		return nil // bbolt initialises an empty file
	}
	read := func(off int64) []byte {
		b := make([]byte, metaSize)
		if _, err := f.ReadAt(b, off+pageHeaderSize); err != nil && !errors.Is(err, io.EOF) {
			return nil
		}
		return b
	}
	var metas []boltMeta
	m0, ok0 := parseMeta(read(0))
	if ok0 {
		metas = append(metas, m0)
	}
	second := int64(4096)
	if ok0 && m0.pageSize >= 512 && m0.pageSize <= 1<<16 {
		second = int64(m0.pageSize)
	}
	if m1, ok := parseMeta(read(second)); ok {
		metas = append(metas, m1)
	}
	if len(metas) == 0 {
		return fmt.Errorf("store %s: %w: no valid bbolt meta page", path, ErrDamaged)
	}
	m := metas[0]
	if len(metas) == 2 && metas[1].txid > m.txid {
		m = metas[1]
	}
	if need := int64(m.pgid) * int64(m.pageSize); m.pageSize == 0 || need > size {
		return fmt.Errorf("store %s: %w: the file is %d bytes but its last commit needs %d (cut short)", path, ErrDamaged, size, need)
	}
	return nil
}
