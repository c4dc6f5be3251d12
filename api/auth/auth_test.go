package auth

import (
	"context"
	"encoding/hex"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
)

// The SHA-256 of "abc" is the first example of FIPS 180-2, appendix B.1.
func TestHashTokenFIPSExample(t *testing.T) {
	h := HashToken("abc")
	if got, want := hex.EncodeToString(h[:]), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"; got != want {
		t.Fatalf("sha256(abc) = %s; want %s", got, want)
	}
}

func TestLineRoundTrip(t *testing.T) {
	tok, err := NewToken()
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(tok, TokenPrefix) || len(tok) != len(TokenPrefix)+43 {
		t.Fatalf("token %q: want prefix %q and 43 base64url characters", tok, TokenPrefix)
	}
	tok2, _ := NewToken()
	if tok == tok2 {
		t.Fatal("two fresh tokens are equal")
	}
	line, err := Line("scanner-1", RolePublish, tok)
	if err != nil {
		t.Fatal(err)
	}
	es, err := ParseTokens(strings.NewReader("# tokens\n\n"+line+"  # the scanning room\n"), "t")
	if err != nil {
		t.Fatal(err)
	}
	if len(es) != 1 || es[0].Name != "scanner-1" || es[0].Role != RolePublish || es[0].Hash != HashToken(tok) {
		t.Fatalf("parsed %+v", es)
	}
	if _, err := Line("two words", RolePlace, tok); err == nil {
		t.Error("a name with a space was accepted")
	}
	if _, err := Line("x", RoleNone, tok); err == nil {
		t.Error("role none was accepted")
	}
}

func TestParseTokensErrors(t *testing.T) {
	h := strings.Repeat("ab", 32)
	h2 := strings.Repeat("cd", 32)
	for _, tc := range []struct{ in, want string }{
		{"a place\n", "line 1: 2 fields"},
		{"a reader " + h + "\n", "line 1: unknown role \"reader\""},
		{"a place xyz\n", "not a SHA-256"},
		{"a place " + h[:62] + "\n", "not a SHA-256"},
		{"a place " + h + "\na admin " + h2 + "\n", "line 2: token name \"a\" already used on line 1"},
		{"a place " + h + "\nb admin " + h + "\n", "line 2: the same token hash"},
	} {
		_, err := ParseTokens(strings.NewReader(tc.in), "f")
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("ParseTokens(%q) = %v; want an error containing %q", tc.in, err, tc.want)
		}
	}
}

func TestCheck(t *testing.T) {
	policy := Policy{"/s/Public": RoleNone, "/s/Place": RolePlace, "/s/Publish": RolePublish, "/s/Delete": RoleAdmin}
	tokens := map[Role]string{RolePlace: "slt_p", RolePublish: "slt_u", RoleAdmin: "slt_a"}
	var es []Entry
	for r, tok := range tokens {
		es = append(es, Entry{Name: r.String() + "-holder", Role: r, Hash: HashToken(tok)})
	}
	c := NewChecker(policy, es)
	call := func(method, header string) (Identity, codes.Code) {
		ctx := context.Background()
		if header != "" {
			ctx = metadata.NewIncomingContext(ctx, metadata.Pairs("authorization", header))
		}
		out, err := c.Check(ctx, method)
		if err != nil {
			return Identity{}, status.Code(err)
		}
		id, _ := FromContext(out)
		return id, codes.OK
	}
	for _, tc := range []struct {
		method, header string
		want           codes.Code
	}{
		{"/s/Public", "", codes.OK},
		{"/s/Place", "", codes.Unauthenticated},
		{"/s/Place", "Bearer slt_wrong", codes.Unauthenticated},
		{"/s/Place", "Basic slt_p", codes.Unauthenticated},
		{"/s/Place", "Bearer ", codes.Unauthenticated},
		{"/s/Place", "Bearer slt_p", codes.OK},
		{"/s/Place", "bearer slt_a", codes.OK},
		{"/s/Publish", "Bearer slt_p", codes.PermissionDenied},
		{"/s/Publish", "Bearer slt_u", codes.OK},
		{"/s/Delete", "Bearer slt_u", codes.PermissionDenied},
		{"/s/Delete", "Bearer slt_a", codes.OK},
		{"/s/Unlisted", "Bearer slt_a", codes.PermissionDenied},
	} {
		if _, got := call(tc.method, tc.header); got != tc.want {
			t.Errorf("%s with %q: %v; want %v", tc.method, tc.header, got, tc.want)
		}
	}
	if id, _ := call("/s/Place", "Bearer slt_u"); id.Name != "publish-holder" || id.Role != RolePublish {
		t.Errorf("identity %+v", id)
	}
	// Replacing the tokens revokes the old ones at once.
	c.Replace([]Entry{{Name: "new", Role: RolePlace, Hash: HashToken("slt_new")}})
	if _, got := call("/s/Place", "Bearer slt_p"); got != codes.Unauthenticated {
		t.Errorf("revoked token: %v", got)
	}
	if id, got := call("/s/Place", "Bearer slt_new"); got != codes.OK || id.Name != "new" {
		t.Errorf("new token: %v %+v", got, id)
	}
	// The hash of the empty string in the file never lets an empty token in.
	c.Replace([]Entry{{Name: "empty", Role: RoleAdmin, Hash: HashToken("")}})
	if _, got := call("/s/Place", "Bearer "); got != codes.Unauthenticated {
		t.Errorf("empty token: %v", got)
	}
	off := NewDisabledChecker(policy)
	ctx, err := off.Check(context.Background(), "/s/Delete")
	if id, _ := FromContext(ctx); err != nil || id.Role != RoleAdmin {
		t.Errorf("disabled checker: %v %+v", err, id)
	}
	if _, err := off.Check(context.Background(), "/s/Unlisted"); status.Code(err) != codes.PermissionDenied {
		t.Errorf("disabled checker let an unlisted method through: %v", err)
	}
}
