//go:build linux

package jobio

import (
	"encoding/binary"
	"os"
	"syscall"
)

// readAt0 reads a kept file from offset 0 with one pread(2) into buf and
// returns the byte count. procfs regenerates /proc/<pid>/io on every read
// from offset 0 (seq_read_iter in fs/seq_file.c restarts at 0), so an open
// descriptor can be read again and again; it keeps referring to the process
// it was opened for, and fails with ESRCH once that process is reaped.
func readAt0(f *os.File, buf []byte) (int, error) {
	for {
		n, err := syscall.Pread(int(f.Fd()), buf, 0)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return 0, &os.PathError{Op: "read", Path: f.Name(), Err: err}
		}
		return n, nil
	}
}

// readFile reads the whole file at path into buf[:0], growing it as
// needed, with open, pread until end of file, and close; nothing is
// allocated but the path's C string and, rarely, a bigger buffer.
func readFile(path string, buf []byte) ([]byte, error) {
	fd, err := open(path, syscall.O_RDONLY)
	if err != nil {
		return buf[:0], err
	}
	defer syscall.Close(fd)
	buf = buf[:0]
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		n, err := syscall.Pread(fd, buf[len(buf):cap(buf)], int64(len(buf)))
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return buf, &os.PathError{Op: "read", Path: path, Err: err}
		}
		if n == 0 {
			return buf, nil
		}
		buf = buf[:len(buf)+n]
	}
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
