//go:build linux

package jobio_test

import (
	"os"
	"syscall"
)

// preadBare reads f from offset 0 with one pread(2), as the Source does.
func preadBare(f *os.File, buf []byte) (int, error) {
	return syscall.Pread(int(f.Fd()), buf, 0)
}
