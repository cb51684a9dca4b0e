//go:build linux

package jobio

import (
	"encoding/binary"
	"os"
	"syscall"
	"unsafe"
)

// readAt0 reads a kept file from offset 0 with one pread(2) into buf and
// returns the byte count. procfs regenerates /proc/<pid>/io on every read
// from offset 0 (seq_read_iter in fs/seq_file.c restarts at 0), so an open
// descriptor can be read again and again; it keeps referring to the process
// it was opened for, and fails with ESRCH once that process is reaped.
func readAt0(f *os.File, buf []byte) (int, error) {
	n, err := pread(int(f.Fd()), buf, 0)
	if err != nil {
		return 0, &os.PathError{Op: "read", Path: f.Name(), Err: err}
	}
	return n, nil
}

// pread is pread(2), retried on EINTR.
func pread(fd int, buf []byte, off int64) (int, error) {
	for {
		n, err := syscall.Pread(fd, buf, off)
		if err != syscall.EINTR {
			return n, err
		}
	}
}

// wholeRead bounds the short read that is taken for the whole file: a read
// from offset 0 that returns fewer bytes than were asked for, and fewer
// than wholeRead, is the whole file, so the read that would return end of
// file is saved. A regular file returns less than asked for only at end of
// file. A seq_file (procfs, and kernfs files such as cgroup.procs and
// io.stat) fills the reader's buffer up to its own page-sized buffer and
// stops short of that only when the file ends or the next record does not
// fit (seq_read_iter in fs/seq_file.c, from memory); records here are far
// shorter than the half of the smallest page (4 KiB) that wholeRead is. A
// longer file is read on until end of file.
const wholeRead = 2048

// readFD reads the file open as fd whole, from offset 0, into buf[:0],
// growing it as needed; see wholeRead. path is for errors. The buffer is
// returned, grown or not, also with an error.
func readFD(fd int, buf []byte, path string) ([]byte, error) {
	buf = buf[:0]
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		n, err := pread(fd, buf[len(buf):cap(buf)], int64(len(buf)))
		if err != nil {
			return buf, &os.PathError{Op: "read", Path: path, Err: err}
		}
		if n == 0 {
			return buf, nil
		}
		whole := len(buf) == 0 && n < cap(buf) && n < wholeRead
		buf = buf[:len(buf)+n]
		if whole {
			return buf, nil
		}
	}
}

// readFile reads the whole file at path into buf[:0], growing it as
// needed, with open, pread and close; nothing is allocated but the path's
// C string and, rarely, a bigger buffer.
func readFile(path string, buf []byte) ([]byte, error) {
	fd, err := open(path, syscall.O_RDONLY)
	if err != nil {
		return buf[:0], err
	}
	defer syscall.Close(fd)
	return readFD(fd, buf, path)
}

// open opens path with O_CLOEXEC, retrying on EINTR.
func open(path string, mode int) (int, error) {
	for {
		fd, err := syscall.Open(path, mode|syscall.O_CLOEXEC, 0)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return -1, &os.PathError{Op: "open", Path: path, Err: err}
		}
		return fd, nil
	}
}

// cname is a file name with its C string made once, so that opening it
// allocates nothing.
type cname struct {
	s string
	p *byte
}

// newCName prepares s. A name holding a NUL byte cannot be opened: openat
// then fails with EINVAL, as open(2) of such a path does in package
// syscall.
func newCName(s string) cname {
	p, _ := syscall.BytePtrFromString(s)
	return cname{s, p}
}

// openat opens name read-only relative to directory descriptor dir, with
// O_CLOEXEC, retrying on EINTR; path is for errors.
func openat(dir int, name cname, path string) (int, error) {
	if name.p == nil {
		return -1, &os.PathError{Op: "open", Path: path, Err: syscall.EINVAL}
	}
	for {
		r, _, e := syscall.Syscall6(syscall.SYS_OPENAT, uintptr(dir), uintptr(unsafe.Pointer(name.p)),
			uintptr(syscall.O_RDONLY|syscall.O_CLOEXEC), 0, 0, 0)
		switch e {
		case 0:
			return int(r), nil
		case syscall.EINTR:
			continue
		}
		return -1, &os.PathError{Op: "open", Path: path, Err: e}
	}
}

// kfd is a descriptor kept open between reads. The zero value holds none.
type kfd struct {
	v int // the descriptor plus one
}

// valid reports whether k holds a descriptor.
func (k kfd) valid() bool { return k.v > 0 }

// close closes the descriptor, if any, and leaves k holding none.
func (k *kfd) close() {
	if k.v > 0 {
		syscall.Close(k.v - 1)
		k.v = 0
	}
}

// openDir opens directory path to keep.
func openDir(path string) (kfd, error) {
	fd, err := open(path, syscall.O_RDONLY|syscall.O_DIRECTORY)
	if err != nil {
		return kfd{}, err
	}
	return kfd{fd + 1}, nil
}

// openIn opens file name of the kept directory dir to keep (openat(2),
// which spares the lookup of the directory's path), or path if dir holds
// no descriptor.
func openIn(dir kfd, name cname, path string) (kfd, error) {
	var fd int
	var err error
	if dir.valid() {
		fd, err = openat(dir.v-1, name, path)
	} else {
		fd, err = open(path, syscall.O_RDONLY)
	}
	if err != nil {
		return kfd{}, err
	}
	return kfd{fd + 1}, nil
}

// readAll reads the kept file whole from offset 0 into buf[:0], growing it
// as needed (see readFD); path is for errors.
func (k kfd) readAll(buf []byte, path string) ([]byte, error) {
	return readFD(k.v-1, buf, path)
}

// rewind moves the kept directory's offset back to its start, as
// rewinddir(3) does, so that it is listed afresh.
func (k kfd) rewind() error {
	_, err := syscall.Seek(k.v-1, 0, 0)
	return err
}

// nlink returns the link count of the kept file, by fstat(2).
func (k kfd) nlink() (uint64, error) {
	var st syscall.Stat_t
	if err := syscall.Fstat(k.v-1, &st); err != nil {
		return 0, err
	}
	return uint64(st.Nlink), nil
}

// eachSubdir calls fn with the name of every subdirectory of path, in
// directory order, using buf for getdents64(2) records. The name is only
// valid during the call. On filesystems that do not fill d_type, entries
// are lstat'ed.
func eachSubdir(path string, buf []byte, fn func(name []byte)) error {
	fd, err := open(path, syscall.O_RDONLY|syscall.O_DIRECTORY)
	if err != nil {
		return err
	}
	defer syscall.Close(fd)
	return eachSubdirFD(fd, path, buf, fn, nil)
}

// eachSubdirIn is eachSubdir for the kept directory dir, read from its
// offset (rewind it first). After each getdents64 batch it calls more, if
// not nil, and stops when more returns false.
func eachSubdirIn(dir kfd, path string, buf []byte, fn func(name []byte), more func() bool) error {
	return eachSubdirFD(dir.v-1, path, buf, fn, more)
}

// eachSubdirFD is eachSubdirIn for the directory open as fd.
func eachSubdirFD(fd int, path string, buf []byte, fn func(name []byte), more func() bool) error {
	for {
		n, err := syscall.ReadDirent(fd, buf)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return &os.PathError{Op: "readdirent", Path: path, Err: err}
		}
		if n <= 0 {
			return nil
		}
		parseDirents(buf[:n], func(name []byte, typ byte) {
			if typ == syscall.DT_UNKNOWN {
				var st syscall.Stat_t
				if syscall.Lstat(path+"/"+string(name), &st) == nil && st.Mode&syscall.S_IFMT == syscall.S_IFDIR {
					typ = syscall.DT_DIR
				}
			}
			if typ == syscall.DT_DIR {
				fn(name)
			}
		})
		if more != nil && !more() {
			return nil
		}
	}
}

// parseDirents walks linux_dirent64 records (include/linux/dirent.h:
// d_ino u64, d_off s64, d_reclen u16, d_type u8, d_name NUL-terminated)
// and calls fn for each entry other than "." and "..".
func parseDirents(b []byte, fn func(name []byte, typ byte)) {
	const nameOff = 19
	for len(b) >= nameOff {
		reclen := int(binary.NativeEndian.Uint16(b[16:18]))
		if reclen < nameOff || reclen > len(b) {
			return
		}
		typ := b[18]
		name := b[nameOff:reclen]
		for i, c := range name {
			if c == 0 {
				name = name[:i]
				break
			}
		}
		b = b[reclen:]
		if len(name) == 0 || string(name) == "." || string(name) == ".." {
			continue
		}
		fn(name, typ)
	}
}
