//go:build !unix

package watch

import (
	"errors"
	"os"
)

var errUnsupported = errors.New("lotgate watch needs Linux or another Unix system (it relies on flock and atomic renames)")

func lockFolder(string) (*os.File, error) { return nil, errUnsupported }

func sameFileSystem(string, string) (bool, error) { return false, errUnsupported }

func openNoFollow(path string) (*os.File, error) { return os.Open(path) }
