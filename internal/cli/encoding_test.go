package cli

import (
	"context"
	"net/url"
	"testing"

	"cairn/internal/pgtest"
)

// A URL that asks for another client_encoding changes nothing: cairn's
// sessions speak UTF-8 (store.Open), so "Größe" is stored as it was typed.
// In a LATIN1 session pgx's UTF-8 bytes would be taken for Latin-1 ones
// and stored as "GrÃ¶Ãe".
func TestClientEncodingForcedToUTF8(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	u, err := url.Parse(db.URL)
	if err != nil {
		t.Fatal(err)
	}
	q := u.Query()
	q.Set("client_encoding", "LATIN1")
	u.RawQuery = q.Encode()
	const word = "Größe"
	mustRun(t, u.String(), "mark", "add", "ENC-1", "--type", word, "--stamping", "ENC 1 Ω")

	var typ, stamping, enc string
	if err := db.Pool.QueryRow(context.Background(), "SELECT mark_type, stamping, current_setting('client_encoding') FROM mark WHERE designation = 'ENC-1'").
		Scan(&typ, &stamping, &enc); err != nil {
		t.Fatal(err)
	}
	if enc != "UTF8" {
		t.Fatalf("checking session in %s, want UTF8", enc)
	}
	if typ != word || stamping != "ENC 1 Ω" {
		t.Errorf("stored %q and %q, want %q and %q", typ, stamping, word, "ENC 1 Ω")
	}
}
