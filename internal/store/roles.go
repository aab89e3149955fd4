package store

import (
	"context"
	"fmt"
)

// RolesApply creates the register's roles when they are absent and the
// connected role may create roles, and grants this database's privileges
// to them (the function cairn_roles_apply of migrations/00005). It returns
// the roles still missing. Running it again changes nothing.
func RolesApply(ctx context.Context, db DBTX) (missing []string, err error) {
	if err := db.QueryRow(ctx, "SELECT cairn_roles_apply()").Scan(&missing); err != nil {
		return nil, fmt.Errorf("apply roles: %w", translate(err))
	}
	return missing, nil
}

// DatabaseApply revokes, on the connected database, what none of the
// register's roles needs (the function cairn_database_apply of
// migrations/00011): TEMPORARY and CREATE on the database, from PUBLIC and
// the roles, and CREATE on schema public. RolesApply does it too; a
// database's own privileges are lost when it is copied from a template,
// which is why the test harness calls it for each database it makes.
func DatabaseApply(ctx context.Context, db DBTX) error {
	if _, err := db.Exec(ctx, "SELECT cairn_database_apply()"); err != nil {
		return fmt.Errorf("revoke TEMPORARY and CREATE: %w", translate(err))
	}
	return nil
}

// Role is one role of the register as the server has it.
type Role struct {
	Name    string
	Exists  bool
	Members []string // roles that are members of it directly, by name
}

// RoleList returns the register's three roles, lowest first.
func RoleList(ctx context.Context, db DBTX) ([]Role, error) {
	rows, err := db.Query(ctx, `SELECT n.name, r.oid IS NOT NULL,
		coalesce((SELECT array_agg(m.rolname ORDER BY m.rolname) FROM pg_auth_members am JOIN pg_roles m ON m.oid = am.member
		          WHERE am.roleid = r.oid), '{}')
		FROM unnest($1::text[]) WITH ORDINALITY AS n (name, ord)
		LEFT JOIN pg_roles r ON r.rolname = n.name
		ORDER BY n.ord`, []string{RoleReader, RoleRecorder, RolePublisher})
	if err != nil {
		return nil, translate(err)
	}
	defer rows.Close()
	var out []Role
	for rows.Next() {
		var r Role
		if err := rows.Scan(&r.Name, &r.Exists, &r.Members); err != nil {
			return nil, translate(err)
		}
		out = append(out, r)
	}
	return out, translate(rows.Err())
}

// CurrentRoles returns the connected role and the register roles it has
// (directly or through membership).
func CurrentRoles(ctx context.Context, db DBTX) (user string, has []string, err error) {
	err = db.QueryRow(ctx, `SELECT current_user, coalesce(array_agg(n ORDER BY n) FILTER (WHERE
		EXISTS (SELECT 1 FROM pg_roles WHERE rolname = n) AND pg_has_role(current_user, n, 'USAGE')), '{}')
		FROM unnest($1::text[]) AS n`, []string{RoleReader, RoleRecorder, RolePublisher}).Scan(&user, &has)
	return user, has, translate(err)
}
