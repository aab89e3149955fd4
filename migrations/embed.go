// Package migrations holds the register's schema as goose SQL files,
// embedded in the binary. A migration once landed is never edited: changes
// are new files.
package migrations

import "embed"

// FS holds the migration files.
//
//go:embed *.sql
var FS embed.FS
