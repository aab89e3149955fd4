package store

import (
	"context"
	"errors"
	"fmt"
	"regexp"
	"strings"
	"sync"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Errors the store returns; test with errors.Is.
var (
	// ErrNotFound: the row asked for does not exist.
	ErrNotFound = errors.New("not found")
	// ErrAlreadyExists: a row with the same key exists (designation, datum code).
	ErrAlreadyExists = errors.New("already exists")
	// ErrConflict: another writer changed the same chain of versions first.
	ErrConflict = errors.New("changed by another writer")
	// ErrAppendOnly: the database refused to change or remove history.
	ErrAppendOnly = errors.New("history is append-only")
	// ErrSealed: the database refused to add a row to a run, an
	// adjustment or a publication made in another transaction
	// (migrations/00011): each is written once, whole.
	ErrSealed = errors.New("the record is sealed")
	// ErrPermission: the role connected lacks a privilege; the message
	// names the role of the register that has it.
	ErrPermission = errors.New("permission denied")
	// ErrFutureDate: the database refused a record dated after today
	// (the triggers of migrations 00009 and 00012).
	ErrFutureDate = errors.New("dated in the future")
	// ErrClock: the database server's clock is behind the register's
	// latest time (migrations/00012); nothing was written.
	ErrClock = errors.New("clock refused")
	// ErrUncarried: the register was copied into a database cluster it has
	// not met, and its transaction numbers were not carried on
	// (migrations/00014); nothing was written until the owner runs
	// cairn db migrate.
	ErrUncarried = errors.New("transaction numbers not carried into this cluster")
	// ErrNameTaken: the database refused a designation that is another
	// mark's alias, an alias that is a mark's designation, or a retired
	// mark as a replacement (migrations/00018).
	ErrNameTaken = errors.New("name taken")
	// ErrInForce: the database refused a version's in-force time: missing
	// from a version from outside, given for one from an adjustment, or
	// after the version is recorded (migrations/00017).
	ErrInForce = errors.New("in-force time refused")
)

// Roles of the register (migrations/00005_roles.sql); each includes the
// ones before it.
const (
	RoleReader    = "cairn_reader"
	RoleRecorder  = "cairn_recorder"
	RolePublisher = "cairn_publisher"
)

// roleToWrite is the least role that may write each table. Reading any
// table needs RoleReader.
var roleToWrite = map[string]string{
	"mark": RoleRecorder, "mark_condition": RoleRecorder, "run": RoleRecorder, "sighting": RoleRecorder,
	"section": RoleRecorder, "run_mark": RoleRecorder, "adjustment": RoleRecorder, "adjustment_run": RoleRecorder,
	"adjustment_held": RoleRecorder, "adjustment_result": RoleRecorder, "mark_version": RoleRecorder, "mark_alias": RoleRecorder,
	"condition_photo": RoleRecorder,
	"mark_retirement": RolePublisher,
	"height":          RolePublisher, "adjustment_event": RolePublisher, "datum": RolePublisher, "run_event": RolePublisher,
	"import_event": RolePublisher,
}

// deniedTable finds the table of "permission denied for table height".
var deniedTable = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`permission denied for (?:table|relation) (\S+)`) })

// permission explains a missing privilege (SQLSTATE 42501): which role of
// the register is needed. role, when not empty, is the role the caller
// knows its statement needs (a row lock needs more than a read).
func permission(pe *pgconn.PgError, role string) error {
	if role == "" {
		if m := deniedTable().FindStringSubmatch(pe.Message); m != nil {
			role = roleToWrite[m[1]]
		}
	}
	what := strings.TrimPrefix(pe.Message, "permission denied")
	if what == pe.Message {
		what = ": " + what
	}
	if role == "" {
		return fmt.Errorf("%w%s (the register's roles are %s, %s and %s; cairn db roles lists them)",
			ErrPermission, what, RoleReader, RoleRecorder, RolePublisher)
	}
	return fmt.Errorf("%w%s: this needs role %s (ask the register's owner to grant it to you)", ErrPermission, what, role)
}

// translateAs is translate for a statement that needs role: a missing
// privilege names it.
func translateAs(err error, role string) error {
	var pe *pgconn.PgError
	if errors.As(err, &pe) && pe.Code == codeDenied {
		return permission(pe, role)
	}
	return translate(err)
}

// SQLSTATE codes raised by the register's triggers (migrations/00001,
// 00009). CA008 is raised by migration 00009 alone, when names collide
// once folded; it reaches the user through the migration's error.
const (
	codeAppendOnly = "CA001" // UPDATE, DELETE or TRUNCATE of append-only history
	codeStale      = "CA002" // a new version does not supersede the latest
	codeFutureDate = "CA009" // a condition report or run dated after today (00009)
	codeClock      = "CA012" // the server's clock is behind the register's latest time (00012)
	codeSealed     = "CA004" // a row added to a parent made in another transaction (00011)
	codeUncarried  = "CA013" // a write in a cluster the register has not met (00014)
	codeNameTaken  = "CA018" // a designation that is an alias, or an alias that is a designation (00018)
	codeInForce    = "CA017" // a version's in-force time missing, given where not allowed, or after its recording (00017)
	codeDenied     = "42501" // insufficient_privilege
)

// constraintsOfChains are the unique constraints that keep each mark's
// versions on one datum a single line; violating one means a concurrent
// writer won.
var constraintsOfChains = map[string]bool{
	"height_supersedes_key":               true,
	"height_first":                        true,
	"height_mark_id_datum_id_version_key": true,
	"mark_version_mark_id_version_key":    true,
}

// translate maps driver errors to the store's errors, keeping the driver's
// message for context.
func translate(err error) error {
	if err == nil {
		return nil
	}
	if errors.Is(err, pgx.ErrNoRows) {
		return ErrNotFound
	}
	var pe *pgconn.PgError
	if !errors.As(err, &pe) {
		return err
	}
	switch {
	case pe.Code == codeAppendOnly:
		return fmt.Errorf("%w: %s", ErrAppendOnly, pe.Message)
	case pe.Code == codeFutureDate:
		return fmt.Errorf("%w: %s", ErrFutureDate, pe.Message)
	case pe.Code == codeSealed:
		return fmt.Errorf("%w: %s", ErrSealed, pe.Message)
	case pe.Code == codeStale, pe.Code == "40001", pe.Code == "40P01",
		pe.Code == "23505" && constraintsOfChains[pe.ConstraintName]:
		return fmt.Errorf("%w: %s", ErrConflict, pe.Message)
	case pe.Code == "23505":
		return fmt.Errorf("%w: %s", ErrAlreadyExists, pe.Message)
	case pe.Code == codeDenied:
		return permission(pe, "")
	case pe.Code == codeClock:
		return fmt.Errorf("%w: %s", ErrClock, pe.Message)
	case pe.Code == codeNameTaken:
		return fmt.Errorf("%w: %s", ErrNameTaken, pe.Message)
	case pe.Code == codeInForce:
		return fmt.Errorf("%w: %s", ErrInForce, pe.Message)
	case pe.Code == codeUncarried:
		return fmt.Errorf("%w: %s (%s)", ErrUncarried, pe.Message, pe.Hint)
	}
	return err
}

// DBTX is what queries run on: a pool, a connection or a transaction.
type DBTX interface {
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
	Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error)
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
}

var (
	_ DBTX = (*pgxpool.Pool)(nil)
	_ DBTX = (pgx.Tx)(nil)
)
