package baseline

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
)

// EncodeBody returns d's uncompressed body, for tests that build bodies.
func EncodeBody(d *Day) []byte { return d.appendBody(nil) }

// Seal wraps body in the version byte, DEFLATE and CRC-32C envelope, so
// tests and the fuzzer can reach the body decoder past the checksum. It
// writes stored (uncompressed) DEFLATE blocks, which any inflater reads,
// because a compressing writer allocates about 1 MB and would make the
// fuzzer crawl.
func Seal(body []byte) []byte {
	var buf bytes.Buffer
	buf.WriteByte(formatVersion)
	zw, _ := flate.NewWriter(&buf, flate.NoCompression)
	_, _ = zw.Write(body)
	_ = zw.Close()
	return binary.LittleEndian.AppendUint32(buf.Bytes(), checksum(buf.Bytes()))
}
