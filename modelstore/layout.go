package modelstore

import (
	"encoding/binary"
	"fmt"
)

// SchemaVersion is the layout version this build writes and reads (see the package doc).
const SchemaVersion = 1

// Bucket and key names: the whole on-disk layout is named here and nowhere else.
var (
	bucketMeta     = []byte("meta")
	bucketModels   = []byte("models")
	bucketHistory  = []byte("history")
	bucketVersions = []byte("versions")
	bucketAliases  = []byte("aliases")

	keySchema  = []byte("schema")
	keyCreated = []byte("created")
	keyNext    = []byte("next")
	keyBundle  = []byte("bundle")
	keyInfo    = []byte("info")
)

// versionKey encodes a version number as an 8-byte big-endian key.
func versionKey(v int) []byte {
	k := make([]byte, 8)
	binary.BigEndian.PutUint64(k, uint64(v))
	return k
}

// parseVersionKey decodes an 8-byte big-endian version key.
func parseVersionKey(k []byte) (int, error) {
	if len(k) != 8 {
		return 0, fmt.Errorf("version key of %d bytes; expected 8", len(k))
	}
	v := binary.BigEndian.Uint64(k)
	if v == 0 || v > 1<<62 {
		return 0, fmt.Errorf("version key %d out of range", v)
	}
	return int(v), nil
}

func uint64Bytes(v uint64) []byte {
	b := make([]byte, 8)
	binary.BigEndian.PutUint64(b, v)
	return b
}

func schemaBytes(v uint32) []byte {
	b := make([]byte, 4)
	binary.BigEndian.PutUint32(b, v)
	return b
}
