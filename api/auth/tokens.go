// Package auth checks bearer tokens for the strayleaf services. A token is a random secret; the
// server knows only its SHA-256, kept in a tokens file with one line per token:
//
//	# comment
//	NAME ROLE SHA256-HEX-OF-TOKEN
//
// NAME identifies the holder in logs and in the store's history; ROLE is place, publish or
// admin. Roles are ordered, each allowing what the ones below it allow: place (read models,
// place, suggest) < publish (publish models, set aliases) < admin (delete versions, export).
package auth

import (
	"bufio"
	"crypto/rand"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// Role is what a token may do. The zero Role allows only what needs no token.
type Role int

const (
	// RoleNone is the role of a call without a token: only public methods (health).
	RoleNone Role = iota
	// RolePlace reads models, places witnesses and asks for suggestions.
	RolePlace
	// RolePublish also publishes models and sets aliases.
	RolePublish
	// RoleAdmin also deletes model versions and exports bundles.
	RoleAdmin
)

var roleNames = map[Role]string{RoleNone: "none", RolePlace: "place", RolePublish: "publish", RoleAdmin: "admin"}

// String returns the role's name as written in the tokens file.
func (r Role) String() string {
	if n, ok := roleNames[r]; ok {
		return n
	}
	return fmt.Sprintf("role(%d)", int(r))
}

// Allows reports whether a caller holding r may call a method that needs role need.
func (r Role) Allows(need Role) bool { return r >= need }

// ParseRole reads a role name: place, publish or admin.
func ParseRole(s string) (Role, error) {
	switch s {
	case "place":
		return RolePlace, nil
	case "publish":
		return RolePublish, nil
	case "admin":
		return RoleAdmin, nil
	}
	return RoleNone, fmt.Errorf("unknown role %q; expected place, publish or admin", s)
}

// Entry is one line of a tokens file.
type Entry struct {
	Name string
	Role Role
	// Hash is the SHA-256 of the token.
	Hash [sha256.Size]byte
}

// TokenPrefix starts every token made by NewToken, so that a token pasted in the wrong place is
// recognisable.
const TokenPrefix = "slt_"

// NewToken returns a fresh token: TokenPrefix and 32 bytes from crypto/rand, base64url.
func NewToken() (string, error) {
	var b [32]byte
	if _, err := rand.Read(b[:]); err != nil {
		return "", fmt.Errorf("making a token: %w", err)
	}
	return TokenPrefix + base64.RawURLEncoding.EncodeToString(b[:]), nil
}

// HashToken returns the SHA-256 of a token.
func HashToken(token string) [sha256.Size]byte { return sha256.Sum256([]byte(token)) }

// Line returns the tokens-file line for a token: "NAME ROLE SHA256-HEX".
func Line(name string, role Role, token string) (string, error) {
	if err := checkName(name); err != nil {
		return "", err
	}
	if role < RolePlace || role > RoleAdmin {
		return "", fmt.Errorf("role %v cannot be given to a token", role)
	}
	h := HashToken(token)
	return name + " " + role.String() + " " + hex.EncodeToString(h[:]), nil
}

func checkName(name string) error {
	switch {
	case name == "":
		return errors.New("empty token name")
	case strings.HasPrefix(name, "#"):
		return fmt.Errorf("token name %q starts with '#', which begins a comment", name)
	case strings.ContainsFunc(name, func(r rune) bool { return r <= ' ' || r == 0x7f }):
		return fmt.Errorf("token name %q has a space or a control character", name)
	case len(name) > 128:
		return fmt.Errorf("token name is %d bytes long; at most 128 allowed", len(name))
	}
	return nil
}

// ParseTokens reads a tokens file. Blank lines and everything from a '#' to the end of a line
// are ignored. Names and hashes must be unique.
func ParseTokens(r io.Reader, source string) ([]Entry, error) {
	var out []Entry
	names := map[string]int{}
	hashes := map[[sha256.Size]byte]int{}
	sc := bufio.NewScanner(r)
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		if i := strings.IndexByte(line, '#'); i >= 0 {
			line = line[:i]
		}
		f := strings.Fields(line)
		if len(f) == 0 {
			continue
		}
		if len(f) != 3 {
			return nil, fmt.Errorf("%s line %d: %d fields; expected NAME ROLE SHA256-HEX", source, n, len(f))
		}
		if err := checkName(f[0]); err != nil {
			return nil, fmt.Errorf("%s line %d: %w", source, n, err)
		}
		role, err := ParseRole(f[1])
		if err != nil {
			return nil, fmt.Errorf("%s line %d: %w", source, n, err)
		}
		raw, err := hex.DecodeString(f[2])
		if err != nil || len(raw) != sha256.Size {
			return nil, fmt.Errorf("%s line %d: %q is not a SHA-256 in hex (64 hex digits); write the hash of the token, not the token (see `strayleaf token new`)", source, n, abbreviate(f[2]))
		}
		e := Entry{Name: f[0], Role: role}
		copy(e.Hash[:], raw)
		if prev, dup := names[e.Name]; dup {
			return nil, fmt.Errorf("%s line %d: token name %q already used on line %d", source, n, e.Name, prev)
		}
		if prev, dup := hashes[e.Hash]; dup {
			return nil, fmt.Errorf("%s line %d: the same token hash is already on line %d", source, n, prev)
		}
		names[e.Name], hashes[e.Hash] = n, n
		out = append(out, e)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("reading %s: %w", source, err)
	}
	return out, nil
}

// abbreviate keeps a possibly secret value out of error messages beyond its first characters.
func abbreviate(s string) string {
	if len(s) > 8 {
		return s[:8] + "..."
	}
	return s
}

// ReadTokensFile reads and parses the tokens file at path.
func ReadTokensFile(path string) ([]Entry, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("reading tokens: %w", err)
	}
	defer f.Close()
	return ParseTokens(f, path)
}
