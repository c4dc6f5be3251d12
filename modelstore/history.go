package modelstore

import (
	"encoding/json"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// EventKind says what a history event records.
type EventKind string

// The kinds of history events.
const (
	EventPublish EventKind = "publish" // a new version from Publish
	EventImport  EventKind = "import"  // a new version from Import
	EventAlias   EventKind = "alias"   // an alias set or moved
	EventUnalias EventKind = "unalias" // an alias removed
	EventDelete  EventKind = "delete"  // a version deleted
)

// Event is one entry of the append-only history. Seq numbers events from 1 in the order their
// transactions committed.
type Event struct {
	Seq     uint64    `json:"seq"`
	Time    time.Time `json:"time"`
	Kind    EventKind `json:"kind"`
	Name    string    `json:"name"`
	Version int       `json:"version"`
	// Alias is the alias of an alias or unalias event; From is the version it pointed at before
	// (0 if it is new).
	Alias  string `json:"alias,omitempty"`
	From   int    `json:"from,omitempty"`
	By     string `json:"by"`
	Detail string `json:"detail"`
}

// appendEvent adds e to the history inside a write transaction, numbering it.
func appendEvent(tx *bolt.Tx, e Event) error {
	h := tx.Bucket(bucketHistory)
	seq, err := h.NextSequence()
	if err != nil {
		return err
	}
	e.Seq = seq
	b, err := json.Marshal(e)
	if err != nil {
		return err
	}
	return h.Put(uint64Bytes(seq), b)
}

// History returns the recorded events of model name ("" for all models), oldest first.
func (s *Store) History(name string) ([]Event, error) {
	out := []Event{}
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketHistory).ForEach(func(k, v []byte) error {
			var e Event
			if err := json.Unmarshal(v, &e); err != nil {
				return fmt.Errorf("%w: history entry %x: %v", ErrCorrupt, k, err)
			}
			if name == "" || e.Name == name {
				out = append(out, e)
			}
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("reading history: %w", err)
	}
	return out, nil
}
