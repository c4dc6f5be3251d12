package modelstore

import (
	"bytes"
	"errors"
	"os"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// TestFlippedStoredByteDetected flips one byte of a stored bundle in the file itself (as a disk
// fault would) and checks that every read of that version fails naming it, while the other
// version still reads.
func TestFlippedStoredByteDetected(t *testing.T) {
	s, path := openTestStore(t, Options{})
	victim := synthBundle(t, synthSpec{units: 200, k: 4, witnesses: 3, seed: 11})
	mustPublish(t, s, "m", victim, PublishMeta{})
	mustPublish(t, s, "m", synthBundle(t, synthSpec{units: 200, k: 4, witnesses: 3, seed: 12}), PublishMeta{})
	s.Close()

	file, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	flipped := 0
	for off := 0; ; {
		i := bytes.Index(file[off:], victim)
		if i < 0 {
			break
		}
		file[off+i+len(victim)/2] ^= 0x10
		flipped++
		off += i + len(victim)
	}
	if flipped == 0 {
		t.Fatal("the stored bundle was not found in the file")
	}
	if err := os.WriteFile(path, file, 0o600); err != nil {
		t.Fatal(err)
	}

	s, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	check := func(call string, err error) {
		t.Helper()
		if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "m@1") {
			t.Errorf("%s of the damaged version = %v; expected ErrCorrupt naming m@1", call, err)
		}
	}
	_, _, err = s.Bundle("m@1")
	check("Bundle", err)
	_, _, err = s.Model("m")
	check("Model", err)
	_, err = s.Export("m@current", &bytes.Buffer{})
	check("Export", err)
	_, err = s.Verify()
	check("Verify", err)
	if _, _, err := s.Model("m@2"); err != nil {
		t.Errorf("the undamaged version fails too: %v", err)
	}
}

func TestImportVerifiesBundles(t *testing.T) {
	src, _ := openTestStore(t, Options{})
	b := synthBundle(t, synthSpec{units: 30, k: 3, witnesses: 4, seed: 5})
	mustPublish(t, src, "m", b, PublishMeta{})
	var exported bytes.Buffer
	info, err := src.Export("m", &exported)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(exported.Bytes(), b) {
		t.Fatal("export changed the bytes")
	}

	dst, _ := openTestStore(t, Options{})
	r, err := dst.Import(bytes.NewReader(exported.Bytes()), "elsewhere", PublishMeta{By: "ana"})
	if err != nil {
		t.Fatal(err)
	}
	got, ginfo, err := dst.Bundle(r.String())
	if err != nil || !bytes.Equal(got, b) || ginfo.SHA256 != info.SHA256 {
		t.Errorf("import elsewhere: same bytes %v, checksums %s vs %s, err %v", bytes.Equal(got, b), ginfo.SHA256, info.SHA256, err)
	}

	tampered := append([]byte(nil), b...)
	tampered[len(tampered)/2] ^= 0x01
	_, err = dst.Import(bytes.NewReader(tampered), "tampered", PublishMeta{})
	if !errors.Is(err, model.ErrChecksum) {
		t.Errorf("importing a tampered bundle = %v; expected model.ErrChecksum", err)
	}

	env := &pb.ModelBundle{}
	if err := proto.Unmarshal(b, env); err != nil {
		t.Fatal(err)
	}
	future, err := proto.Marshal(&pb.ModelBundle{FormatVersion: 99, Model: env.Model, ModelSha256: env.ModelSha256})
	if err != nil {
		t.Fatal(err)
	}
	_, err = dst.Import(bytes.NewReader(future), "future", PublishMeta{})
	if !errors.Is(err, model.ErrFormatVersion) || !strings.Contains(err.Error(), "format 99") {
		t.Errorf("importing a format-99 bundle = %v; expected model.ErrFormatVersion saying format 99", err)
	}

	_, err = dst.Import(strings.NewReader("this is no bundle"), "junk", PublishMeta{})
	if !errors.Is(err, model.ErrNotBundle) {
		t.Errorf("importing junk = %v; expected model.ErrNotBundle", err)
	}
	if _, err := dst.Import(bytes.NewReader(b), "", PublishMeta{}); !errors.Is(err, ErrInvalidName) {
		t.Errorf("importing without a name = %v; expected ErrInvalidName", err)
	}

	// A bundle whose checksum is right but whose model is inconsistent is refused as well.
	bad := synthModel(synthSpec{units: 5, k: 2, seed: 1})
	bad.Profile[3] = -1
	badBundle, err := model.EncodeBundle(bad)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := dst.Publish("bad", badBundle, PublishMeta{}); err == nil || !strings.Contains(err.Error(), "non-negative") {
		t.Errorf("publishing a model with a negative profile entry = %v; expected a refusal", err)
	}

	list, err := dst.List()
	if err != nil || len(list) != 1 || list[0].Name != "elsewhere" {
		t.Errorf("refused bundles left something behind: %+v, %v", list, err)
	}
	ev, _ := dst.History("")
	if len(ev) != 2 {
		t.Errorf("refused imports were recorded in history: %+v", ev)
	}
}
