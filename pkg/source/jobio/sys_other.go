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

// readAllFrom reads f whole from offset 0 into buf[:0], growing it as
// needed.
func readAllFrom(f *os.File, buf []byte) ([]byte, error) {
	buf = buf[:0]
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		n, err := f.ReadAt(buf[len(buf):cap(buf)], int64(len(buf)))
		buf = buf[:len(buf)+n]
		if errors.Is(err, io.EOF) {
			return buf, nil
		}
		if err != nil {
			return buf, err
		}
	}
}

// readFile reads the whole file at path into buf[:0], growing it as needed.
func readFile(path string, buf []byte) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return buf[:0], err
	}
	defer f.Close()
	return readAllFrom(f, buf)
}

// cname is a file name; see the Linux version.
type cname struct{ s string }

// newCName returns s as a cname.
func newCName(s string) cname { return cname{s} }

// kfd is a file kept open between reads. The zero value holds none.
type kfd struct{ f *os.File }

// valid reports whether k holds a file.
func (k kfd) valid() bool { return k.f != nil }

// close closes the file, if any, and leaves k holding none.
func (k *kfd) close() {
	if k.f != nil {
		k.f.Close()
		k.f = nil
	}
}

// openDir opens directory path to keep.
func openDir(path string) (kfd, error) {
	f, err := os.Open(path)
	if err != nil {
		return kfd{}, err
	}
	return kfd{f}, nil
}

// openIn opens path to keep; name and dir serve the Linux version only.
func openIn(_ kfd, _ cname, path string) (kfd, error) {
	f, err := os.Open(path)
	if err != nil {
		return kfd{}, err
	}
	return kfd{f}, nil
}

// readAll reads the kept file whole from offset 0 into buf[:0].
func (k kfd) readAll(buf []byte, _ string) ([]byte, error) { return readAllFrom(k.f, buf) }

// rewind moves the kept directory's offset back to its start.
func (k kfd) rewind() error {
	_, err := k.f.Seek(0, io.SeekStart)
	return err
}

// nlink is not used outside Linux: every listing counts as untrusted, so
// a job's subtree is listed on every read.
func (k kfd) nlink() (uint64, error) { return 0, errors.ErrUnsupported }

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

// eachSubdirIn is eachSubdir for the kept directory dir, rewound first;
// it lists the whole directory, more serves the Linux version only.
func eachSubdirIn(dir kfd, _ string, _ []byte, fn func(name []byte), _ func() bool) error {
	entries, err := dir.f.ReadDir(-1)
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
