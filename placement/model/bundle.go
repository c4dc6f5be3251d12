package model

import (
	"bytes"
	"crypto/sha256"
	"errors"
	"fmt"

	"google.golang.org/protobuf/proto"

	pb "strayleaf/proto/strayleaf/v1"
)

// FormatVersion is the bundle format this build writes and the only one it reads.
const FormatVersion = 1

var (
	// ErrChecksum is returned for a bundle whose model bytes do not match their SHA-256.
	ErrChecksum = errors.New("model bundle checksum mismatch: the bundle is damaged or was altered")
	// ErrFormatVersion is returned for a bundle of a format version this build does not read.
	ErrFormatVersion = errors.New("unknown model bundle format version")
	// ErrNotBundle is returned for bytes that are not a model bundle at all.
	ErrNotBundle = errors.New("not a strayleaf model bundle")
)

// EncodeBundle serialises m as a checksummed bundle: ModelBundle{format_version, model bytes,
// SHA-256 of the model bytes}. The encoding is deterministic, so the same model gives the same
// bytes.
func EncodeBundle(m *pb.Model) ([]byte, error) {
	inner, err := proto.MarshalOptions{Deterministic: true}.Marshal(m)
	if err != nil {
		return nil, fmt.Errorf("encoding model: %w", err)
	}
	sum := sha256.Sum256(inner)
	out, err := proto.MarshalOptions{Deterministic: true}.Marshal(&pb.ModelBundle{
		FormatVersion: FormatVersion, Model: inner, ModelSha256: sum[:],
	})
	if err != nil {
		return nil, fmt.Errorf("encoding model bundle: %w", err)
	}
	return out, nil
}

// DecodeBundleProto checks a bundle's format version and checksum and returns the model message.
func DecodeBundleProto(b []byte) (*pb.Model, error) {
	var env pb.ModelBundle
	if err := proto.Unmarshal(b, &env); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNotBundle, err)
	}
	if env.FormatVersion == 0 && len(env.Model) == 0 {
		return nil, ErrNotBundle
	}
	if env.FormatVersion != FormatVersion {
		return nil, fmt.Errorf("%w: the bundle says format %d, this build reads format %d", ErrFormatVersion, env.FormatVersion, FormatVersion)
	}
	sum := sha256.Sum256(env.Model)
	if !bytes.Equal(sum[:], env.ModelSha256) {
		return nil, ErrChecksum
	}
	var m pb.Model
	if err := proto.Unmarshal(env.Model, &m); err != nil {
		return nil, fmt.Errorf("%w: model bytes: %v", ErrNotBundle, err)
	}
	return &m, nil
}

// Decode checks and decodes a bundle and builds the placement indexes of its model.
func Decode(b []byte) (*Model, error) {
	m, err := DecodeBundleProto(b)
	if err != nil {
		return nil, err
	}
	return FromProto(m)
}
