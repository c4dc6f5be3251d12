package tei

import (
	"errors"
	"io"
)

var (
	errInputLimit = errors.New("input limit reached")
	errTokenLimit = errors.New("token size limit reached")
)

// boundedReader feeds the XML decoder byte by byte (it is an io.ByteReader, so the decoder reads
// through it without a buffer of its own), counts the bytes, drops a leading UTF-8 byte order
// mark, and fails once the input or the current token grows past its limit. The decoder keeps
// the failure as its error, so a read stops at the limit instead of buffering an unbounded token.
type boundedReader struct {
	r        io.Reader
	buf      []byte
	pos, end int
	err      error // the underlying reader's error, returned once buf is drained
	n        int64 // bytes handed to the decoder
	stop     int64 // n at which the next limit is reached: min(maxInput, tokenStart+maxToken)
	maxInput int64
	maxToken int64
	started  bool
}

func newBoundedReader(r io.Reader, maxInput, maxToken int64) *boundedReader {
	b := &boundedReader{r: r, buf: make([]byte, 64<<10), maxInput: maxInput, maxToken: maxToken}
	b.startToken()
	return b
}

// startToken marks the start of the next token.
func (b *boundedReader) startToken() {
	b.stop = b.maxInput
	if t := b.n + b.maxToken; t < b.stop {
		b.stop = t
	}
}

// ReadByte implements io.ByteReader.
func (b *boundedReader) ReadByte() (byte, error) {
	if b.pos < b.end && b.n < b.stop {
		c := b.buf[b.pos]
		b.pos++
		b.n++
		return c, nil
	}
	return b.slowByte()
}

func (b *boundedReader) slowByte() (byte, error) {
	if b.n >= b.stop {
		if b.n >= b.maxInput {
			return 0, errInputLimit
		}
		return 0, errTokenLimit
	}
	for b.pos >= b.end {
		if b.err != nil {
			return 0, b.err
		}
		b.fill()
	}
	return b.ReadByte()
}

// fill reads the next chunk. The first fill reads at least 3 bytes (if there are so many) to
// see a byte order mark. A reader that keeps returning nothing and no error is given up on.
func (b *boundedReader) fill() {
	want := 1
	if !b.started {
		want = 3
	}
	n, empty := 0, 0
	for n < want && b.err == nil {
		m, err := b.r.Read(b.buf[n:])
		n += m
		b.err = err
		if m == 0 && err == nil {
			if empty++; empty > 100 {
				b.err = io.ErrNoProgress
			}
		}
	}
	b.pos, b.end = 0, n
	if !b.started {
		b.started = true
		if n >= 3 && b.buf[0] == 0xEF && b.buf[1] == 0xBB && b.buf[2] == 0xBF {
			b.pos = 3
		}
	}
}

// Read implements io.Reader (used only if a charset reader wraps this one).
func (b *boundedReader) Read(p []byte) (int, error) {
	n := 0
	for n < len(p) {
		c, err := b.ReadByte()
		if err != nil {
			if n > 0 && err == io.EOF {
				return n, nil
			}
			return n, err
		}
		p[n] = c
		n++
		if b.pos >= b.end {
			break
		}
	}
	return n, nil
}
