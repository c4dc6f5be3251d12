package modelstore

import (
	"fmt"
	"strconv"
	"strings"
)

// DefaultAlias is the alias a bare model name refers to.
const DefaultAlias = "current"

// Ref names one stored version of a model.
type Ref struct {
	Name    string `json:"name"`
	Version int    `json:"version"`
}

// String gives the reference in the form "name@3".
func (r Ref) String() string { return r.Name + "@" + strconv.Itoa(r.Version) }

// refSpec is a parsed, unresolved model reference: exactly one of version and alias is set.
type refSpec struct {
	name    string
	version int
	alias   string
}

// parseRef parses "name", "name@3" or "name@alias". A bare name means name@current.
func parseRef(ref string) (refSpec, error) {
	name, after, hasAt := strings.Cut(ref, "@")
	if err := checkModelName(name); err != nil {
		return refSpec{}, fmt.Errorf("model reference %q: %w", ref, err)
	}
	if !hasAt {
		return refSpec{name: name, alias: DefaultAlias}, nil
	}
	if after == "" {
		return refSpec{}, fmt.Errorf("model reference %q: %w: nothing after '@'; expected a version number or an alias", ref, ErrInvalidName)
	}
	if after[0] >= '0' && after[0] <= '9' {
		v, err := strconv.Atoi(after)
		if err != nil || v < 1 {
			return refSpec{}, fmt.Errorf("model reference %q: %w: version %q is not a whole number of at least 1", ref, ErrInvalidName, after)
		}
		return refSpec{name: name, version: v}, nil
	}
	if err := checkAliasName(after); err != nil {
		return refSpec{}, fmt.Errorf("model reference %q: %w", ref, err)
	}
	return refSpec{name: name, alias: after}, nil
}

// MaxNameLength bounds model and alias names.
const MaxNameLength = 64

// CheckModelName reports whether name is a valid model name (an error wrapping ErrInvalidName
// if not), so that a caller can tell which of several names it was given is at fault.
func CheckModelName(name string) error { return checkModelName(name) }

// checkModelName accepts 1 to 64 characters from [A-Za-z0-9._-], starting with a letter or a
// digit.
func checkModelName(name string) error {
	if err := checkChars(name); err != nil {
		return fmt.Errorf("%w: model name %q %s", ErrInvalidName, name, err)
	}
	return nil
}

// checkAliasName accepts the model-name characters, starting with a letter, so that an alias is
// never mistaken for a version number.
func checkAliasName(alias string) error {
	if err := checkChars(alias); err != nil {
		return fmt.Errorf("%w: alias %q %s", ErrInvalidName, alias, err)
	}
	if c := alias[0]; !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z') {
		return fmt.Errorf("%w: alias %q must start with a letter (a leading digit reads as a version number)", ErrInvalidName, alias)
	}
	return nil
}

type nameProblem string

func (p nameProblem) Error() string { return string(p) }

func checkChars(s string) error {
	if s == "" {
		return nameProblem("is empty")
	}
	if len(s) > MaxNameLength {
		return nameProblem(fmt.Sprintf("is %d bytes long; at most %d allowed", len(s), MaxNameLength))
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-'
		if !ok {
			return nameProblem(fmt.Sprintf("has %q at byte %d; allowed are letters, digits, '.', '_' and '-'", c, i))
		}
		if i == 0 && (c == '.' || c == '_' || c == '-') {
			return nameProblem("must start with a letter or a digit")
		}
	}
	return nil
}
