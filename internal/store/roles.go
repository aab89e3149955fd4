package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
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

// RoleLoginParams describe a login role that acts with a register role's
// privileges.
type RoleLoginParams struct {
	Name     string
	Password string
	// MemberOf is the register role it is a member of; it is made (NOLOGIN,
	// with no privileges until the register's migrations grant them) when
	// missing.
	MemberOf string
	// SetPassword sets the password of a role that exists already.
	SetPassword bool
}

// RoleLogin makes the login role p.Name when it is missing (neither
// superuser nor able to create roles or databases), a member of
// p.MemberOf. Running it again changes nothing.
func RoleLogin(ctx context.Context, conn *pgx.Conn, p RoleLoginParams) error {
	member := pgx.Identifier{p.MemberOf}.Sanitize()
	name := pgx.Identifier{p.Name}.Sanitize()
	var hasGroup, hasLogin, isMember bool
	err := conn.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = $1), EXISTS (SELECT 1 FROM pg_roles WHERE rolname = $2),
		EXISTS (SELECT 1 FROM pg_auth_members am JOIN pg_roles g ON g.oid = am.roleid JOIN pg_roles m ON m.oid = am.member
		        WHERE g.rolname = $1 AND m.rolname = $2)`, p.MemberOf, p.Name).Scan(&hasGroup, &hasLogin, &isMember)
	if err != nil {
		return fmt.Errorf("look for role %s: %w", p.Name, translate(err))
	}
	var stmts []string
	if !hasGroup {
		stmts = append(stmts, "CREATE ROLE "+member+" NOLOGIN")
	}
	pw := "PASSWORD " + quoteLiteral(p.Password)
	if !hasLogin {
		stmts = append(stmts, "CREATE ROLE "+name+" LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE INHERIT NOREPLICATION NOBYPASSRLS "+pw)
	} else if p.SetPassword {
		stmts = append(stmts, "ALTER ROLE "+name+" "+pw)
	}
	if !isMember {
		stmts = append(stmts, "GRANT "+member+" TO "+name)
	}
	for _, sql := range stmts {
		if _, err := conn.Exec(ctx, sql); err != nil {
			return fmt.Errorf("make role %s: %w", p.Name, translate(err))
		}
	}
	return nil
}

// RolePassword sets a role's password.
func RolePassword(ctx context.Context, conn *pgx.Conn, role, password string) error {
	if _, err := conn.Exec(ctx, "ALTER ROLE "+pgx.Identifier{role}.Sanitize()+" PASSWORD "+quoteLiteral(password)); err != nil {
		return fmt.Errorf("set password of role %s: %w", role, translate(err))
	}
	return nil
}

// ReloadConfig has the server read its configuration files again.
func ReloadConfig(ctx context.Context, conn *pgx.Conn) error {
	if _, err := conn.Exec(ctx, "SELECT pg_reload_conf()"); err != nil {
		return fmt.Errorf("reload server configuration: %w", translate(err))
	}
	return nil
}

// WritePrivileges lists the register's tables (schema public) on which
// the connected role may write: INSERT, UPDATE, DELETE or TRUNCATE on
// the table, or INSERT or UPDATE on any of its columns, as "table
// PRIVILEGE", by table. A role with none of them can only read (cairn
// serve refuses to start on any other).
func WritePrivileges(ctx context.Context, db DBTX) ([]string, error) {
	rows, err := db.Query(ctx, `SELECT c.relname || ' ' || p.priv FROM pg_class c
		JOIN pg_namespace n ON n.oid = c.relnamespace
		CROSS JOIN unnest(ARRAY['INSERT', 'UPDATE', 'DELETE', 'TRUNCATE']) WITH ORDINALITY AS p (priv, ord)
		WHERE n.nspname = 'public' AND c.relkind IN ('r', 'p')
		AND (has_table_privilege(c.oid, p.priv) OR (p.priv IN ('INSERT', 'UPDATE') AND has_any_column_privilege(c.oid, p.priv)))
		ORDER BY c.relname, p.ord`)
	if err != nil {
		return nil, fmt.Errorf("read the connected role's privileges: %w", translate(err))
	}
	return collect(rows, func(r pgx.Row) (string, error) {
		var s string
		return s, translate(r.Scan(&s))
	})
}
