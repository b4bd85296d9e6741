//go:build unix

package watch

import (
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"syscall"
)

// lockFolder takes an exclusive flock on path (created if missing) and
// writes the process id into it. The lock lasts until the returned file is
// closed or the process ends, however it ends.
func lockFolder(path string) (*os.File, error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, err
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		holder, _ := os.ReadFile(path)
		f.Close()
		if errors.Is(err, syscall.EWOULDBLOCK) {
			return nil, fmt.Errorf("another watcher (pid %s) holds %s: one watcher per output folder", strings.TrimSpace(string(holder)), path)
		}
		return nil, fmt.Errorf("locking %s: %w", path, err)
	}
	if err := f.Truncate(0); err == nil {
		_, _ = f.WriteAt([]byte(strconv.Itoa(os.Getpid())+"\n"), 0)
	}
	return f, nil
}

// sameFileSystem reports whether two folders are on one file system, so
// that a rename between them is atomic.
func sameFileSystem(a, b string) (bool, error) {
	var sa, sb syscall.Stat_t
	if err := syscall.Stat(a, &sa); err != nil {
		return false, &os.PathError{Op: "stat", Path: a, Err: err}
	}
	if err := syscall.Stat(b, &sb); err != nil {
		return false, &os.PathError{Op: "stat", Path: b, Err: err}
	}
	return sa.Dev == sb.Dev, nil
}

// openNoFollow opens a file for reading without following a symbolic link
// and without blocking on a named pipe swapped in under the same name.
func openNoFollow(path string) (*os.File, error) {
	return os.OpenFile(path, os.O_RDONLY|syscall.O_NOFOLLOW|syscall.O_NONBLOCK, 0)
}
