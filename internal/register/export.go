package register

import (
	"context"
	"encoding/csv"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strconv"

	"github.com/jackc/pgx/v5"

	"cairn/internal/store"
)

// ExportResult counts the rows written to each file.
type ExportResult struct {
	Files map[string]int64
	// Adjustments counts the height versions from the register's own
	// adjustments (kind adjustment) in heights.csv: an import refuses
	// them, so a re-import needs each as an authority, citing its
	// publication.
	Adjustments int64
}

// Export writes the register to dir in the layout of docs/import.md:
// marks.csv (each mark as first recorded, and its retirement),
// descriptions.csv (every later version of a description), aliases.csv,
// conditions.csv (every condition report, with its id as its ref),
// photos.csv and the folder photos (every photograph, each file named by
// its SHA-256) and heights.csv (every height version in recorded order,
// with its in-force time), read in one snapshot and streamed row by row.
// dir is made if it does not exist; a file of the layout already in it is
// refused, never overwritten.
func (r *Register) Export(ctx context.Context, dir string) (ExportResult, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return ExportResult{}, inputErr("out", "%v", err)
	}
	for _, n := range append(slices.Clone(importFiles), PhotosDir) {
		if _, err := os.Stat(filepath.Join(dir, n)); err == nil {
			return ExportResult{}, inputErr("out", "%s is there already: export into an empty folder", filepath.Join(dir, n))
		} else if !errors.Is(err, fs.ErrNotExist) {
			return ExportResult{}, inputErr("out", "%v", err)
		}
	}
	res := ExportResult{Files: map[string]int64{}}
	err := r.runTx(ctx, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		for _, f := range []struct {
			name   string
			header []string
			rows   func(context.Context, store.DBTX, func([]string) error) error
			unit   int // the column of a unit, or -1
		}{
			{MarksFile, exportMarkHeader, store.ExportMarks, -1},
			{DescriptionsFile, descriptionHeader, store.ExportDescriptions, -1},
			{AliasesFile, aliasHeader, store.ExportAliases, -1},
			{ConditionsFile, conditionHeader, store.ExportConditions, -1},
			{PhotosFile, photoHeader, func(ctx context.Context, db store.DBTX, w func([]string) error) error {
				return exportPhotos(ctx, db, filepath.Join(dir, PhotosDir), w)
			}, -1},
			{HeightsFile, heightHeader, func(ctx context.Context, db store.DBTX, w func([]string) error) error {
				return store.ExportHeights(ctx, db, func(rec []string) error {
					if rec[2] == KindAdjustment {
						res.Adjustments++
					}
					return w(rec)
				})
			}, 4},
		} {
			n, err := exportFile(ctx, tx, filepath.Join(dir, f.name), f.header, f.rows, f.unit)
			if err != nil {
				return err
			}
			res.Files[f.name] = n
		}
		return nil
	})
	if err != nil {
		return ExportResult{}, fmt.Errorf("export to %s: %w", dir, err)
	}
	return res, nil
}

// exportPhotos writes each photograph to folder photos (made at the
// first), named by its SHA-256 and the extension of its type, and its row
// of photos.csv to w. The same picture kept twice is one file.
func exportPhotos(ctx context.Context, db store.DBTX, dir string, w func([]string) error) error {
	written := map[string]bool{}
	return store.ExportPhotos(ctx, db, func(p store.ExportPhoto) error {
		ext := ".jpg"
		if p.MediaType == "image/png" {
			ext = ".png"
		}
		name := hex.EncodeToString(p.SHA256) + ext
		if !written[name] {
			if len(written) == 0 {
				if err := os.Mkdir(dir, 0o755); err != nil {
					return err
				}
			}
			if err := os.WriteFile(filepath.Join(dir, name), p.Content, 0o644); err != nil {
				return err
			}
			written[name] = true
		}
		return w([]string{strconv.FormatInt(p.ConditionID, 10), p.View, PhotosDir + "/" + name, p.FileName, p.RecordedBy})
	})
}

func exportFile(ctx context.Context, tx pgx.Tx, path string, header []string,
	rows func(context.Context, store.DBTX, func([]string) error) error, unit int) (int64, error) {
	fh, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return 0, err
	}
	w := csv.NewWriter(fh)
	if err := w.Write(header); err != nil {
		fh.Close()
		return 0, err
	}
	var n int64
	err = rows(ctx, tx, func(rec []string) error {
		if unit >= 0 {
			rec[unit] = ExportUnit(rec[unit])
		}
		n++
		return w.Write(rec)
	})
	w.Flush()
	if err == nil {
		err = w.Error()
	}
	if cerr := fh.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return n, fmt.Errorf("write %s: %w", path, err)
	}
	return n, nil
}
