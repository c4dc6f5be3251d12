// Package modelstore keeps trained group models frozen and versioned in one bbolt file, so that a
// placement written into a catalogue record can always be traced to, and repeated against, the
// exact model it was made with.
//
// # Layout
//
// All bucket and key names are declared once, in layout.go.
//
//	meta/                          top-level bucket
//	    schema  -> uint32, big-endian: the layout version (SchemaVersion)
//	    created -> RFC 3339 time the store was made
//	models/                        top-level bucket; one nested bucket per model name
//	    <name>/
//	        next     -> uint64, big-endian: the number the next version will get (never reused)
//	        versions/                one nested bucket per version
//	            <version: uint64, big-endian>/
//	                bundle -> the model bundle bytes exactly as published (placement/model)
//	                info   -> JSON metadata: created, by, note, sha256 (of the bundle bytes),
//	                          size, training summary
//	        aliases/
//	            <alias>  -> JSON {version, by, set}
//	history/                       top-level bucket, append-only
//	    <sequence: uint64, big-endian> -> JSON Event (publish, import, alias, unalias, delete)
//
// Version keys are big-endian so that bbolt's byte order is numeric order. Versions are
// numbered 1, 2, 3 ... per model; a deleted number is never given out again (the next key only
// grows), so "name@3" names one bundle for the whole life of the store or nothing at all.
//
// # Immutability
//
// A version, once written, is never changed: Publish creates a version bucket that must not
// exist yet, and there is no call that writes into an existing one. DeleteVersion removes a
// whole version (only while no alias points at it). Aliases ("current", "candidate", or any
// name) are the only mutable pointers; moving one is a single transaction recorded in history.
//
// # Integrity
//
// The SHA-256 of the bundle bytes is recorded at publish time and checked on every read
// (Bundle, Export, a cold Model load, Verify); a mismatch is an error naming the version
// (ErrCorrupt), never a wrong answer. The bundle carries its own format version and its own
// checksum of the model bytes, which model.DecodeBundleProto checks as well. Bundles are fully
// decoded and validated (model.Decode) before they are stored, whether published or imported.
//
// # Cache
//
// Decoded models are immutable, so one *model.Model is shared by all callers. They are kept in
// an in-memory cache bounded by Options.CacheBytes (sum of model.SizeBytes), evicting the least
// recently used. Resolved references ("name", "name@current") are cached too and dropped on every
// write through this Store; bbolt's file lock guarantees no other process writes while this one
// has the file open, so the cache cannot go stale.
//
// # Processes
//
// A writable Store holds an exclusive lock on the file; read-only Stores (Options.ReadOnly)
// share a lock, so several reader processes can open one file while no writer has it. Open
// waits Options.LockTimeout for the lock and then fails with ErrLocked.
package modelstore
