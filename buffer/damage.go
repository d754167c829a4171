package buffer

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"time"
)

// isFormatError reports whether an error from bolt.Open is about the file's content rather than
// the operating system (a missing directory, a permission).
func isFormatError(err error) bool {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return false
	}
	var se *os.SyscallError
	return !errors.As(err, &se)
}

// moveAside renames a damaged file to path.damaged-<time stamp> and syncs the directory.
func moveAside(path string, now time.Time) (string, error) {
	base := path + ".damaged-" + now.UTC().Format("20060102T150405Z")
	dst := base
	for i := 1; ; i++ {
		if _, err := os.Lstat(dst); errors.Is(err, fs.ErrNotExist) {
			break
		}
		dst = fmt.Sprintf("%s-%d", base, i)
	}
	if err := os.Rename(path, dst); err != nil {
		return "", err
	}
	return dst, syncDir(filepath.Dir(path))
}

// syncDir fsyncs a directory so that a rename in it survives a power cut.
func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	return err
}

// recoverDamage turns a panic into an error wrapping ErrDamaged; deferred by view and commit.
func (s *Store) recoverDamage(err *error) {
	if p := recover(); p != nil {
		*err = fmt.Errorf("store %s: %w: %v", s.path, ErrDamaged, p)
	}
}
