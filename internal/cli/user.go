package cli

import (
	"os"
	"os/user"
)

// osUser is who runs cairn, the default for --by.
func osUser() string {
	if u, err := user.Current(); err == nil && u.Username != "" {
		return u.Username
	}
	if u := os.Getenv("USER"); u != "" {
		return u
	}
	return "unknown"
}
