package cli

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/store"
)

// roleDuties says what each role of the register may do.
var roleDuties = map[string]string{
	store.RoleReader:    "look up marks, heights, histories, runs, adjustments; audit",
	store.RoleRecorder:  "reader, and record runs, condition reports, new marks and draft adjustments",
	store.RolePublisher: "recorder, and publish and discard adjustments, set outside heights, add datums",
}

func newCmdDBRoles(f *Factory, runF func(*dbOptions) error) *cobra.Command {
	cmd, opts := newDBCmd(f, "roles", "Create the register's roles and grant their privileges in this database", runF, dbRolesRun)
	cmd.Long = `Create the register's three roles, when they are missing, and grant each its
privileges in this database; then list them with their members. Running it
again changes nothing.

  cairn_reader     look-ups only
  cairn_recorder   the reader's, and recording runs, condition reports,
                   new marks and draft adjustments
  cairn_publisher  the recorder's, and publishing and discarding
                   adjustments, setting heights from outside sources and
                   adding datums

The roles cannot log in: make each person a login role of their own and a
member of one of these, for example

  CREATE ROLE rokafor LOGIN; GRANT cairn_recorder TO rokafor;

Roles belong to the whole server, so registers in several databases of one
server share them; run "cairn db roles" in each (migrating a new register
does it when the owner may create roles). Nobody, the owner included, may
change or remove history.`
	addOutputFlag(cmd, &opts.format)
	return cmd
}

type roleJSON struct {
	Role    string   `json:"role"`
	Exists  bool     `json:"exists"`
	May     string   `json:"may"`
	Members []string `json:"members"`
}

func dbRolesRun(opts *dbOptions) error {
	if _, err := opts.f.Pool(opts.ctx); err != nil {
		return err
	}
	pool, err := opts.f.Admin(opts.ctx)
	if err != nil {
		return err
	}
	missing, err := store.RolesApply(opts.ctx, pool)
	if err != nil {
		return err
	}
	roles, err := store.RoleList(opts.ctx, pool)
	if err != nil {
		return err
	}
	out := []roleJSON{}
	for _, r := range roles {
		m := r.Members
		if m == nil {
			m = []string{}
		}
		out = append(out, roleJSON{Role: r.Name, Exists: r.Exists, May: roleDuties[r.Name], Members: m})
	}
	if err := render(opts.f.IO, opts.format, out, func() Table {
		t := Table{Headers: []string{"ROLE", "MAY", "MEMBERS"}}
		for _, r := range out {
			t.AddRow(r.Role, r.May, strings.Join(r.Members, ","))
		}
		return t
	}); err != nil {
		return err
	}
	if len(missing) > 0 {
		return fmt.Errorf("roles %s are missing and the connected role may not create them: run cairn db roles as a role with CREATEROLE", strings.Join(missing, ", "))
	}
	fmt.Fprintln(opts.f.IO.ErrOut, "roles and privileges in place")
	return nil
}
