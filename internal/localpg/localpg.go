// Package localpg runs cairn's embedded default: a private PostgreSQL
// cluster under the user's data folder, made with the system's initdb and
// run by pg_ctl on a Unix socket inside that folder.
package localpg

import (
	"context"
	"errors"
)

// Cluster is a private PostgreSQL cluster in a folder of its own.
type Cluster struct {
	// Dir holds the cluster: data/, the socket, the log.
	Dir string
}

// Default returns the embedded default cluster
// ($XDG_DATA_HOME/cairn, else ~/.local/share/cairn).
func Default() (*Cluster, error) {
	return nil, errors.New("localpg: the embedded default is not built yet")
}

// Start makes the cluster if it does not exist, starts it if it is not
// running, and returns a connection URL for its cairn database.
func (c *Cluster) Start(ctx context.Context) (string, error) {
	return "", errors.New("localpg: not built yet")
}
