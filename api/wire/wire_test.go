package wire

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

func sample(n int) *pb.PlaceRequest {
	r := &pb.PlaceRequest{Model: "demo@current", Witness: "Ov-f3"}
	for u := range n {
		wr := &pb.WitnessReading{Unit: fmt.Sprintf("oil.%02d", u+1), Reading: fmt.Sprintf("rd%d", u%5)}
		if u == 3 {
			wr.Reading = "" // protobuf leaves empty strings out
		}
		r.Readings = append(r.Readings, wr)
	}
	return r
}

// The encoder writes exactly what protobuf-go writes (deterministic marshal), which the
// standard decoder reads back as the same message.
func TestEncodeMatchesProtobuf(t *testing.T) {
	asked := sample(3)
	asked.Nearest, asked.BySection = 5, true
	long := sample(2) // lengths past one varint byte, non-ASCII readings
	long.Readings = append(long.Readings, &pb.WitnessReading{Unit: strings.Repeat("u", 130), Reading: "þorn"},
		&pb.WitnessReading{Unit: "w", Reading: strings.Repeat("ð", 70)})
	long.Witness = strings.Repeat("W", 300)
	for _, m := range []*pb.PlaceRequest{{}, {Witness: "x"}, sample(1), sample(400), {Readings: []*pb.WitnessReading{{}}},
		asked, {Nearest: -2}, {Nearest: 1 << 30}, {BySection: true}, long} {
		want, err := proto.MarshalOptions{Deterministic: true}.Marshal(m)
		if err != nil {
			t.Fatal(err)
		}
		in := &Input{Model: m.GetModel(), Witness: m.GetWitness(), Nearest: m.GetNearest(), BySection: m.GetBySection()}
		for _, r := range m.GetReadings() {
			in.Readings = append(in.Readings, model.Reading{Unit: r.GetUnit(), Reading: r.GetReading()})
		}
		got := in.AppendTo(nil)
		if n := in.Size(); n != len(want) {
			t.Errorf("Size = %d; the encoding has %d bytes", n, len(want))
		}
		if !bytes.Equal(got, want) {
			t.Fatalf("AppendTo differs from proto.Marshal for %v:\n got %x\nwant %x", m, got, want)
		}
		// The codec writes the same bytes for the Input and for both protobuf messages.
		stream := &pb.PlaceStreamRequest{Model: m.GetModel(), Witness: m.GetWitness(), Readings: m.GetReadings(), Nearest: m.GetNearest(), BySection: m.GetBySection()}
		for _, v := range []any{in, m, stream} {
			data, err := Codec().Marshal(v)
			if err != nil {
				t.Fatal(err)
			}
			if b := data.Materialize(); !bytes.Equal(b, want) {
				t.Fatalf("Marshal(%T) differs from proto.Marshal for %v:\n got %x\nwant %x", v, m, b, want)
			}
			data.Free()
		}
	}
}

// decodeBoth decodes b into an Input with the codec, and into a PlaceRequest with
// proto.Unmarshal, and compares the outcomes.
func decodeBoth(t *testing.T, b []byte) {
	t.Helper()
	var std pb.PlaceRequest
	stdErr := proto.Unmarshal(b, &std)
	// An Input reused from a bigger request.
	in := Input{Model: "stale", Readings: make([]model.Reading, 3, 500)}
	inErr := Codec().Unmarshal(mem.BufferSlice{mem.SliceBuffer(append([]byte(nil), b...))}, &in)
	if (stdErr == nil) != (inErr == nil) {
		t.Fatalf("%x: protobuf says %v, the codec %v", b, stdErr, inErr)
	}
	if stdErr != nil {
		return
	}
	// Unknown fields are kept by protobuf and dropped by the codec; the rest must agree.
	if in.Model != std.Model || in.Witness != std.Witness || in.Nearest != std.Nearest || in.BySection != std.BySection ||
		len(in.Readings) != len(std.Readings) {
		t.Fatalf("%x: Input %+v; protobuf %v", b, in, &std)
	}
	for i, r := range std.Readings {
		if in.Readings[i] != (model.Reading{Unit: r.GetUnit(), Reading: r.GetReading()}) {
			t.Fatalf("%x: Input reading %d = %+v; protobuf %v", b, i, in.Readings[i], r)
		}
	}
}

func TestDecodeMatchesProtobuf(t *testing.T) {
	good, _ := proto.Marshal(sample(40))
	var odd []byte
	odd = protowire.AppendTag(odd, 9, protowire.VarintType) // an unknown field
	odd = protowire.AppendVarint(odd, 7)
	odd = append(odd, good...)
	odd = protowire.AppendTag(odd, fieldWitness, protowire.BytesType) // the last value wins
	odd = protowire.AppendString(odd, "second")
	inner := protowire.AppendTag(nil, 5, protowire.Fixed32Type) // unknown field in a reading
	inner = protowire.AppendFixed32(inner, 1)
	inner = appendString(inner, fieldUnit, "u")
	odd = protowire.AppendTag(odd, fieldReadings, protowire.BytesType)
	odd = protowire.AppendBytes(odd, inner)
	badUTF8 := appendString(nil, fieldWitness, "ok")
	badUTF8 = protowire.AppendTag(badUTF8, fieldModel, protowire.BytesType)
	badUTF8 = protowire.AppendBytes(badUTF8, []byte{0xff, 0xfe})
	wrongType := protowire.AppendTag(nil, fieldModel, protowire.VarintType)
	wrongType = protowire.AppendVarint(wrongType, 3)
	asked := sample(4)
	asked.Nearest, asked.BySection = 7, true
	withOptions, _ := proto.Marshal(asked)
	// Negative nearest (10-byte varint), a bool written as 2, the last value winning.
	options := protowire.AppendTag(nil, fieldNearest, protowire.VarintType)
	minusThree := int64(-3)
	options = protowire.AppendVarint(options, uint64(minusThree))
	options = protowire.AppendTag(options, fieldBySection, protowire.VarintType)
	options = protowire.AppendVarint(options, 2)
	options = protowire.AppendTag(options, fieldNearest, protowire.VarintType)
	options = protowire.AppendVarint(options, 9)
	optionWrongType := protowire.AppendTag(nil, fieldBySection, protowire.BytesType)
	optionWrongType = protowire.AppendString(optionWrongType, "yes")
	overlong := protowire.AppendTag(nil, fieldNearest, protowire.VarintType)
	overlong = append(overlong, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01)
	nonASCII, _ := proto.Marshal(&pb.PlaceRequest{Witness: "Æ-f1", Readings: []*pb.WitnessReading{{Unit: "u1", Reading: "þorn"}}})
	badReading := appendString(nil, fieldWitness, "ok")
	badReading = protowire.AppendTag(badReading, fieldReadings, protowire.BytesType)
	badReading = protowire.AppendBytes(badReading, protowire.AppendBytes(protowire.AppendTag(nil, fieldReading, protowire.BytesType), []byte{'a', 0xc3}))
	for name, b := range map[string][]byte{
		"non-ASCII UTF-8": nonASCII, "invalid UTF-8 in a reading": badReading,
		"empty": nil, "sample": good, "unknown fields and repeats": odd, "invalid UTF-8": badUTF8,
		"wrong wire type": wrongType, "truncated": good[:len(good)-3], "garbage": []byte{0x1a, 0xff, 0xff, 0xff},
		"nearest and by_section": withOptions, "odd option values": options, "option of the wrong wire type": optionWrongType,
		"overlong varint": overlong,
	} {
		t.Run(name, func(t *testing.T) { decodeBoth(t, b) })
	}
}

func FuzzDecodeMatchesProtobuf(f *testing.F) {
	good, _ := proto.Marshal(sample(5))
	f.Add(good)
	f.Add([]byte{0x1a, 0x02, 0x0a, 0x00})
	f.Add([]byte{0x20, 0x05, 0x28, 0x01})
	f.Add([]byte{0x20, 0xfd, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01, 0x28, 0x02})
	f.Fuzz(func(t *testing.T, b []byte) { decodeBoth(t, b) })
}

// Other messages go through the standard codec.
func TestOtherMessagesUseProtobuf(t *testing.T) {
	m := &pb.GetModelRequest{Model: "demo@2"}
	data, err := Codec().Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	var back pb.GetModelRequest
	if err := Codec().Unmarshal(data, &back); err != nil || back.Model != "demo@2" {
		t.Fatalf("%v %v", &back, err)
	}
}

// BenchmarkDecode400 is the baseline: the same request decoded into protobuf messages, which the
// codec leaves to protobuf-go.
func BenchmarkDecode400(b *testing.B) {
	raw, _ := proto.Marshal(sample(400))
	b.ReportAllocs()
	for b.Loop() {
		var r pb.PlaceRequest
		if err := Codec().Unmarshal(mem.BufferSlice{mem.SliceBuffer(raw)}, &r); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecodeInput400 is the server's decode: into a reused Input.
func BenchmarkDecodeInput400(b *testing.B) {
	raw, _ := proto.Marshal(sample(400))
	var in Input
	b.ReportAllocs()
	for b.Loop() {
		if err := Codec().Unmarshal(mem.BufferSlice{mem.SliceBuffer(raw)}, &in); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkEncode400(b *testing.B) {
	m := sample(400)
	in := &Input{Model: m.Model, Witness: m.Witness}
	for _, r := range m.Readings {
		in.Readings = append(in.Readings, model.Reading{Unit: r.Unit, Reading: r.Reading})
	}
	b.ReportAllocs()
	b.Run("Input", func(b *testing.B) {
		for b.Loop() {
			data, _ := Codec().Marshal(in)
			data.Free()
		}
	})
	b.Run("PlaceRequest", func(b *testing.B) {
		for b.Loop() {
			data, _ := Codec().Marshal(m)
			data.Free()
		}
	})
}

// The codec knows the fields of the placement requests by number: a field added to either
// message, or one that changes, must be taught to it (this test then fails until it is).
func TestRequestMessagesHaveTheKnownFields(t *testing.T) {
	want := map[protowire.Number]string{
		fieldModel: "model string", fieldWitness: "witness string", fieldReadings: "readings repeated message",
		fieldNearest: "nearest int32", fieldBySection: "by_section bool",
	}
	describe := func(fd protoreflect.FieldDescriptor) string {
		if fd == nil {
			return "missing"
		}
		d := string(fd.Name())
		if fd.Cardinality() == protoreflect.Repeated {
			d += " repeated"
		}
		return d + " " + fd.Kind().String()
	}
	for _, m := range []proto.Message{&pb.PlaceRequest{}, &pb.PlaceStreamRequest{}} {
		fields := m.ProtoReflect().Descriptor().Fields()
		if fields.Len() != len(want) {
			t.Errorf("%T has %d fields; the codec knows %d", m, fields.Len(), len(want))
		}
		for i := range fields.Len() {
			fd := fields.Get(i)
			if got := describe(fd); got != want[fd.Number()] {
				t.Errorf("%T field %d is %q; the codec expects %q", m, fd.Number(), got, want[fd.Number()])
			}
		}
	}
	rd := (&pb.WitnessReading{}).ProtoReflect().Descriptor().Fields()
	if rd.Len() != 2 || describe(rd.ByNumber(fieldUnit)) != "unit string" || describe(rd.ByNumber(fieldReading)) != "reading string" {
		t.Errorf("WitnessReading's fields are not (1 unit string, 2 reading string)")
	}
}
