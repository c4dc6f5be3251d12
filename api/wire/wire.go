// Package wire is the gRPC codec of strayleaf: standard protobuf encoding throughout, with a
// hand-written encoder and decoder for the placement requests (PlaceRequest and
// PlaceStreamRequest: model, witness, readings, nearest, by_section), which carry hundreds of
// small readings per witness and dominate the cost of the generic protobuf code. The bytes on
// the wire are exactly protobuf's: a peer using any other protobuf library reads and writes them
// alike.
//
// Both go through an Input instead of a protobuf message. The server decodes a placement
// request into one: the readings land in one reusable slice of model.Reading, and every string
// of the request points into a single copy of its bytes, so decoding a witness of any size
// allocates that copy and nothing per reading. Clients send an Input the same way, encoded into
// a pooled buffer; a protobuf request message is encoded by way of one. Anything the fast
// decoder does not expect (an unknown wire type for a known field, invalid UTF-8, a truncated
// message) is handed to the standard decoder, so errors and edge cases stay exactly
// protobuf's. Decoding into the protobuf messages themselves is left to the standard codec.
package wire

import (
	"encoding/binary"
	"errors"
	"slices"
	"sync"
	"unicode/utf8"
	"unsafe"

	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// Name is the codec's name: it is the protobuf codec, so it keeps protobuf's name.
const Name = "proto"

// Codec returns the codec; give it to the server with grpc.ForceServerCodecV2 and to clients
// with grpc.ForceCodecV2.
func Codec() encoding.CodecV2 { return codec{std: encoding.GetCodecV2(Name)} }

type codec struct{ std encoding.CodecV2 }

func (codec) Name() string { return Name }

func (c codec) Marshal(v any) (mem.BufferSlice, error) {
	switch m := v.(type) {
	case *Input:
		return encode(m), nil
	case *pb.PlaceRequest:
		return encodeProto(m.GetModel(), m.GetWitness(), m.GetReadings(), m.GetNearest(), m.GetBySection()), nil
	case *pb.PlaceStreamRequest:
		return encodeProto(m.GetModel(), m.GetWitness(), m.GetReadings(), m.GetNearest(), m.GetBySection()), nil
	}
	return c.std.Marshal(v)
}

// encode writes in into a buffer of gRPC's pool (gRPC frees it once the message is sent).
func encode(in *Input) mem.BufferSlice {
	pool := mem.DefaultBufferPool()
	buf := pool.Get(in.Size())
	*buf = in.AppendTo((*buf)[:0])
	return mem.BufferSlice{mem.NewBuffer(buf, pool)}
}

// staging recycles the Inputs that protobuf placement requests are encoded through.
var staging = sync.Pool{New: func() any { return new(Input) }}

// encodeProto encodes the fields of a protobuf placement request by way of an Input.
func encodeProto(ref, witness string, readings []*pb.WitnessReading, nearest int32, bySection bool) mem.BufferSlice {
	in := staging.Get().(*Input)
	in.fill(ref, witness, readings, nearest, bySection)
	data := encode(in)
	in.Reset()
	staging.Put(in)
	return data
}

func (c codec) Unmarshal(data mem.BufferSlice, v any) error {
	if in, ok := v.(*Input); ok {
		return in.decode(data)
	}
	return c.std.Unmarshal(data, v)
}

// Input is a placement request without protobuf messages: the fields PlaceRequest and
// PlaceStreamRequest share (same names, same numbers), with the readings as model readings. The
// codec decodes either message into an Input, whose strings then point into one copy of the
// message's bytes, and encodes an Input as either message (the bytes are the same), so servers
// and clients can skip a protobuf message per reading. Readings keeps its capacity across
// decodes and Reset, so an Input is worth reusing.
type Input struct {
	Model, Witness string
	Readings       []model.Reading
	Nearest        int32
	BySection      bool
}

// Reset empties in for reuse, keeping the capacity of its readings and letting go of the
// strings of the last request.
func (in *Input) Reset() {
	clear(in.Readings)
	*in = Input{Readings: in.Readings[:0]}
}

// decode decodes a placement request into in (reset first) with the hand-written decoder; a
// message the fast path does not take goes to protobuf-go, whose answer is copied in.
func (in *Input) decode(data mem.BufferSlice) error {
	buf := data.Materialize()
	in.Reset()
	if decodeInput(buf, in) == nil {
		return nil
	}
	var m pb.PlaceRequest
	if err := proto.Unmarshal(buf, &m); err != nil {
		in.Reset()
		return err
	}
	in.FromRequest(&m)
	return nil
}

// FromRequest sets in to the content of a protobuf PlaceRequest.
func (in *Input) FromRequest(m *pb.PlaceRequest) {
	in.fill(m.GetModel(), m.GetWitness(), m.GetReadings(), m.GetNearest(), m.GetBySection())
}

// fill sets in, reset first, to the fields of a protobuf placement request.
func (in *Input) fill(ref, witness string, readings []*pb.WitnessReading, nearest int32, bySection bool) {
	in.Reset()
	in.Model, in.Witness, in.Nearest, in.BySection = ref, witness, nearest, bySection
	for _, r := range readings {
		in.Readings = append(in.Readings, model.Reading{Unit: r.GetUnit(), Reading: r.GetReading()})
	}
}

// Field numbers shared by PlaceRequest and PlaceStreamRequest (model 1, witness 2, readings 3,
// nearest 4, by_section 5) and WitnessReading (unit 1, reading 2).
const (
	fieldModel     = 1
	fieldWitness   = 2
	fieldReadings  = 3
	fieldNearest   = 4
	fieldBySection = 5
	fieldUnit      = 1
	fieldReading   = 2
)

// One-byte tags of the fields the fast paths look for.
const (
	readingsTag = byte(fieldReadings<<3) | byte(protowire.BytesType)
	unitTag     = byte(fieldUnit<<3) | byte(protowire.BytesType)
	readingTag  = byte(fieldReading<<3) | byte(protowire.BytesType)
)

// Size is the length of the encoding AppendTo writes.
func (in *Input) Size() int {
	n := stringSize(in.Model) + stringSize(in.Witness)
	for _, rd := range in.Readings {
		inner := stringSize(rd.Unit) + stringSize(rd.Reading)
		n += 1 + protowire.SizeBytes(inner)
	}
	if in.Nearest != 0 {
		// An int32 is written as its 64-bit sign extension, as protobuf does.
		n += 1 + protowire.SizeVarint(uint64(int64(in.Nearest)))
	}
	if in.BySection {
		n += 2
	}
	return n
}

func stringSize(s string) int {
	if s == "" {
		return 0
	}
	return 1 + protowire.SizeBytes(len(s))
}

// AppendTo appends the protobuf encoding of in, as a PlaceRequest or PlaceStreamRequest, to b,
// as protobuf-go writes it (fields in number order, zero values left out).
func (in *Input) AppendTo(b []byte) []byte {
	b = appendString(b, fieldModel, in.Model)
	b = appendString(b, fieldWitness, in.Witness)
	for _, r := range in.Readings {
		n := stringSize(r.Unit) + stringSize(r.Reading)
		if n < 0x80 {
			b = append(b, readingsTag, byte(n))
		} else {
			b = protowire.AppendTag(b, fieldReadings, protowire.BytesType)
			b = protowire.AppendVarint(b, uint64(n))
		}
		b = appendString(b, fieldUnit, r.Unit)
		b = appendString(b, fieldReading, r.Reading)
	}
	if in.Nearest != 0 {
		b = protowire.AppendTag(b, fieldNearest, protowire.VarintType)
		b = protowire.AppendVarint(b, uint64(int64(in.Nearest)))
	}
	if in.BySection {
		b = protowire.AppendTag(b, fieldBySection, protowire.VarintType)
		b = protowire.AppendVarint(b, 1)
	}
	return b
}

func appendString(b []byte, num protowire.Number, s string) []byte {
	if s == "" {
		return b
	}
	if len(s) < 0x80 && num < 16 {
		// One-byte tag and length: the common case of short unit ids and readings.
		b = append(b, byte(num)<<3|byte(protowire.BytesType), byte(len(s)))
		return append(b, s...)
	}
	b = protowire.AppendTag(b, num, protowire.BytesType)
	return protowire.AppendString(b, s)
}

// isASCII reports whether every byte of b is below 0x80, eight bytes at a time.
func isASCII(b []byte) bool {
	for len(b) >= 8 {
		if binary.LittleEndian.Uint64(b)&0x8080808080808080 != 0 {
			return false
		}
		b = b[8:]
	}
	for _, c := range b {
		if c >= 0x80 {
			return false
		}
	}
	return true
}

// errFallback sends a message to the standard decoder.
var errFallback = errors.New("wire: not handled by the fast decoder")

// tag reads a field tag; one-byte tags (field numbers up to 15) take the short way.
func tag(b []byte) (protowire.Number, protowire.Type, int) {
	if len(b) > 0 && b[0] < 0x80 && b[0] >= 8 {
		return protowire.Number(b[0] >> 3), protowire.Type(b[0] & 7), 1
	}
	num, typ, n := protowire.ConsumeTag(b)
	if n >= 0 && num > protowire.MaxValidNumber {
		return 0, 0, -1
	}
	return num, typ, n
}

// bytesField reads a length-delimited value: its offset from b and its end, or -1.
func bytesField(b []byte) (start, end int) {
	if len(b) > 0 && b[0] < 0x80 {
		if l := int(b[0]); 1+l <= len(b) {
			return 1, 1 + l
		}
		return -1, -1
	}
	v, n := protowire.ConsumeBytes(b)
	if n < 0 {
		return -1, -1
	}
	return n - len(v), n
}

// decodeInput decodes buf into r, appending to r.Readings; it keeps buf: the strings point
// into it.
func decodeInput(buf []byte, r *Input) error {
	if len(buf) == 0 {
		return nil
	}
	all := unsafe.String(&buf[0], len(buf))
	// A message of ASCII bytes only (tags and lengths below 0x80 included) holds only valid
	// UTF-8 strings: one pass over it spares checking every string.
	ascii := isASCII(buf)
	// First pass: check the framing and count the readings, so that they are allocated at once.
	n := 0
	for off := 0; off < len(buf); {
		if off+1 < len(buf) && buf[off] == readingsTag && buf[off+1] < 0x80 {
			// A reading of under 128 bytes, the common case.
			if off += 2 + int(buf[off+1]); off > len(buf) {
				return errFallback
			}
			n++
			continue
		}
		num, typ, tl := tag(buf[off:])
		if tl < 0 {
			return errFallback
		}
		off += tl
		if typ == protowire.BytesType {
			_, end := bytesField(buf[off:])
			if end < 0 {
				return errFallback
			}
			if num == fieldReadings {
				n++
			}
			off += end
			continue
		}
		vl := protowire.ConsumeFieldValue(num, typ, buf[off:])
		if vl < 0 {
			return errFallback
		}
		off += vl
	}
	r.Readings = slices.Grow(r.Readings[:0], n)[:n]
	i := 0
	for off := 0; off < len(buf); {
		if off+1 < len(buf) && buf[off] == readingsTag && buf[off+1] < 0x80 {
			// The common shape, unit then reading, both short; the first pass checked that the
			// reading's bytes are there. Any other shape takes the general way below.
			end := off + 2 + int(buf[off+1])
			if u := off + 2; u+2 <= end && buf[u] == unitTag && buf[u+1] < 0x80 {
				if v := u + 2 + int(buf[u+1]); v+2 <= end && buf[v] == readingTag && buf[v+1] < 0x80 && v+2+int(buf[v+1]) == end {
					unit, reading := all[u+2:v], all[v+2:end]
					if !ascii && (!utf8.ValidString(unit) || !utf8.ValidString(reading)) {
						return errFallback
					}
					r.Readings[i] = model.Reading{Unit: unit, Reading: reading}
					i++
					off = end
					continue
				}
			}
		}
		num, typ, tl := tag(buf[off:])
		off += tl
		if num == fieldNearest || num == fieldBySection {
			if typ != protowire.VarintType {
				return errFallback
			}
			v, vl := protowire.ConsumeVarint(buf[off:])
			off += vl
			if num == fieldNearest {
				r.Nearest = int32(v)
			} else {
				r.BySection = protowire.DecodeBool(v)
			}
			continue
		}
		if num != fieldModel && num != fieldWitness && num != fieldReadings {
			if typ == protowire.BytesType {
				_, end := bytesField(buf[off:])
				off += end
			} else {
				off += protowire.ConsumeFieldValue(num, typ, buf[off:])
			}
			continue
		}
		if typ != protowire.BytesType {
			return errFallback
		}
		vs, ve := bytesField(buf[off:])
		start, end := off+vs, off+ve
		off = end
		if num != fieldReadings {
			s := all[start:end]
			if !ascii && !utf8.ValidString(s) {
				return errFallback
			}
			if num == fieldModel {
				r.Model = s
			} else {
				r.Witness = s
			}
			continue
		}
		wr := &r.Readings[i]
		*wr = model.Reading{}
		for p := start; p < end; {
			rn, rt, rtl := tag(buf[p:end])
			if rtl < 0 {
				return errFallback
			}
			p += rtl
			if rt != protowire.BytesType {
				if rn == fieldUnit || rn == fieldReading {
					return errFallback
				}
				// Unknown fields are skipped (protobuf keeps them; nothing here reads them).
				fl := protowire.ConsumeFieldValue(rn, rt, buf[p:end])
				if fl < 0 {
					return errFallback
				}
				p += fl
				continue
			}
			fs, fe := bytesField(buf[p:end])
			if fe < 0 {
				return errFallback
			}
			if rn == fieldUnit || rn == fieldReading {
				val := all[p+fs : p+fe]
				if !ascii && !utf8.ValidString(val) {
					return errFallback
				}
				if rn == fieldUnit {
					wr.Unit = val
				} else {
					wr.Reading = val
				}
			}
			p += fe
		}
		i++
	}
	return nil
}
