//go:build !linux

package jobio_test

import (
	"errors"
	"io"
	"os"
)

// preadBare reads f from offset 0, as the Source does.
func preadBare(f *os.File, buf []byte) (int, error) {
	n, err := f.ReadAt(buf, 0)
	if errors.Is(err, io.EOF) {
		err = nil
	}
	return n, err
}
