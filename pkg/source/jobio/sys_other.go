//go:build !linux

package jobio

import (
	"errors"
	"io"
	"os"
)

// readAt0 reads a kept file from offset 0 into buf and returns the byte
// count; see the Linux version.
func readAt0(f *os.File, buf []byte) (int, error) {
	n, err := f.ReadAt(buf, 0)
	if errors.Is(err, io.EOF) {
		err = nil
	}
	return n, err
}

// readFile reads the whole file at path into buf[:0], growing it as needed.
func readFile(path string, buf []byte) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return buf[:0], err
	}
	defer f.Close()
	buf = buf[:0]
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		n, err := f.Read(buf[len(buf):cap(buf)])
		buf = buf[:len(buf)+n]
		if errors.Is(err, io.EOF) {
			return buf, nil
		}
		if err != nil {
			return buf, err
		}
	}
}

// eachSubdir calls fn with the name of every subdirectory of path.
func eachSubdir(path string, _ []byte, fn func(name []byte)) error {
	entries, err := os.ReadDir(path)
	if err != nil {
		return err
	}
	for _, e := range entries {
		if e.IsDir() {
			fn([]byte(e.Name()))
		}
	}
	return nil
}
