package procfile

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
)

// DefaultMaxSize is the MaxSize a zero Options means.
const DefaultMaxSize = 64 << 20

// initialSize is the size of the first buffer, or MaxSize+1 if smaller. It
// holds a /proc/diskstats of 100 devices or a mountstats of one NFSv4
// mount; larger files double it once or twice on the first Load only.
const initialSize = 16 << 10

// ErrTooLarge is wrapped by the error of a Load whose file is larger than
// Options.MaxSize.
var ErrTooLarge = errors.New("file too large")

// Options tunes a File.
type Options struct {
	// CheckEvery is how many loads share one check that the path still
	// names the open file: 1 checks before every Load but the one that
	// opens the file, 12 before every twelfth. Zero or less means 1.
	CheckEvery int
	// MaxSize is the largest file, in bytes, that Load reads; a larger one
	// is an error wrapping ErrTooLarge. Zero or less means DefaultMaxSize.
	MaxSize int
	// NoRetry makes a read error end the Load, with the file closed, where
	// the zero value opens the path again and reads it once more. Either
	// way the next Load opens the path again.
	NoRetry bool
}

// File is one path kept open and read whole from offset 0 by Load.
type File struct {
	path       string
	checkEvery int
	maxSize    int
	noRetry    bool

	f          *os.File
	fi         fs.FileInfo // f's identity, to compare with the path's
	buf        []byte
	sinceCheck int // loads since the last check or open
	opens      int
}

// New returns a File for path. Nothing is opened until the first Load.
func New(path string, opts Options) *File {
	f := &File{
		path:       path,
		checkEvery: max(opts.CheckEvery, 1),
		maxSize:    opts.MaxSize,
		noRetry:    opts.NoRetry,
	}
	if f.maxSize <= 0 {
		f.maxSize = DefaultMaxSize
	}
	f.maxSize = min(f.maxSize, math.MaxInt-1) // the buffer holds maxSize+1

	return f
}

// Path returns the path the File reads.
func (f *File) Path() string { return f.path }

// Opens returns how many times the File has opened its path, successfully,
// so that tests can tell a kept descriptor from a reopened one.
func (f *File) Opens() int { return f.opens }

// Load returns the whole file read from offset 0. The bytes are the File's
// buffer, valid until the next Load; Close leaves them alone.
//
// The path is opened when no file is open, and opened again when the
// check (every CheckEvery loads) finds it names another file or none. A
// read error closes the file and, unless NoRetry is set, the path is opened
// and read once more. A missing file gives an error wrapping
// fs.ErrNotExist.
func (f *File) Load() ([]byte, error) {
	if f.f != nil && f.sinceCheck >= f.checkEvery {
		f.sinceCheck = 0
		if fi, err := os.Stat(f.path); err != nil || !os.SameFile(fi, f.fi) {
			_ = f.Close() // replaced or gone: open what the path names now
		}
	}
	if f.f == nil {
		if err := f.open(); err != nil {
			return nil, err
		}
	}
	f.sinceCheck++
	data, err := f.readAll()
	if err == nil {
		return data, nil
	}
	_ = f.Close()
	if f.noRetry {
		return nil, fmt.Errorf("reading %s: %w", f.path, err)
	}
	// The descriptor may have gone bad; one fresh open decides.
	if err := f.open(); err != nil {
		return nil, err
	}
	if data, err = f.readAll(); err != nil {
		_ = f.Close()
		return nil, fmt.Errorf("reading %s: %w", f.path, err)
	}
	return data, nil
}

// Close closes the open file, if any. The File stays usable: the next Load
// opens the path again.
func (f *File) Close() error {
	if f.f == nil {
		return nil
	}
	err := f.f.Close()
	f.f, f.fi = nil, nil
	return err
}

// open opens the path and records the file's identity.
func (f *File) open() error {
	file, err := os.Open(f.path)
	if err != nil {
		return fmt.Errorf("opening %s: %w", f.path, err)
	}
	fi, err := file.Stat()
	if err != nil {
		_ = file.Close()
		return fmt.Errorf("opening %s: %w", f.path, err)
	}
	f.f, f.fi, f.sinceCheck = file, fi, 0
	f.opens++
	return nil
}

// readAll reads the whole file from offset 0 into f.buf, doubling it while
// the file does not fit, up to maxSize+1 bytes: a file that fills those is
// too large.
func (f *File) readAll() ([]byte, error) {
	if f.buf == nil {
		f.buf = make([]byte, min(initialSize, f.maxSize+1))
	}
	n := 0
	for {
		m, err := f.f.ReadAt(f.buf[n:], int64(n))
		n += m
		switch {
		case err == io.EOF:
			return f.buf[:n], nil
		case err != nil:
			return nil, err
		case n > f.maxSize:
			return nil, fmt.Errorf("%w: over %d bytes", ErrTooLarge, f.maxSize)
		}
		// ReadAt filled the buffer (it returns a nil error only then).
		f.buf = append(f.buf, make([]byte, min(len(f.buf), f.maxSize+1-len(f.buf)))...)
	}
}
