package tei

import (
	"bufio"
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
	r          *bufio.Reader
	n          int64 // bytes handed to the decoder
	maxInput   int64
	tokenStart int64 // n when the current token began
	maxToken   int64
	started    bool
	limitErr   error // the limit that stopped the read, if any
}

func newBoundedReader(r io.Reader, maxInput, maxToken int64) *boundedReader {
	return &boundedReader{r: bufio.NewReaderSize(r, 64<<10), maxInput: maxInput, maxToken: maxToken}
}

// startToken marks the start of the next token.
func (b *boundedReader) startToken() { b.tokenStart = b.n }

func (b *boundedReader) skipBOM() {
	b.started = true
	if p, err := b.r.Peek(3); err == nil && p[0] == 0xEF && p[1] == 0xBB && p[2] == 0xBF {
		_, _ = b.r.Discard(3)
	}
}

// ReadByte implements io.ByteReader.
func (b *boundedReader) ReadByte() (byte, error) {
	if !b.started {
		b.skipBOM()
	}
	if b.n >= b.maxInput {
		b.limitErr = errInputLimit
		return 0, errInputLimit
	}
	if b.n-b.tokenStart >= b.maxToken {
		b.limitErr = errTokenLimit
		return 0, errTokenLimit
	}
	c, err := b.r.ReadByte()
	if err == nil {
		b.n++
	}
	return c, err
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
		if b.r.Buffered() == 0 {
			break
		}
	}
	return n, nil
}
