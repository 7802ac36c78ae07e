package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"strings"

	"example.com/fluxroom/internal/export"
	"example.com/fluxroom/store"
)

// exportCmd writes a session's gradebook, readings, JSON or report from the
// database file. The server holds the file's lock while it runs; then use
// the dashboard's download buttons or the Export RPC instead.
func (m *Main) exportCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("export")
	dbPath := fs.String("db", "fluxroom-data/fluxroom.db", "the bbolt database file")
	session := fs.Uint64("session", 0, "the session id (fluxroom export --db … lists them when left out)")
	format := fs.String("format", "csv", "csv (gradebook), readings, json or html")
	out := fs.String("out", "-", "output file, - for standard output")
	policy := fs.String("policy", "", "grade with this policy file instead of the session's")
	all := fs.Bool("all", false, "one gradebook CSV of every session in the file (a term), with the session in front of each row")
	if err := parse(fs, args); err != nil {
		return err
	}
	db, err := openExisting(*dbPath)
	if errors.Is(err, store.ErrLocked) {
		return fmt.Errorf("%s is in use by a running fluxroom server: use the dashboard's export buttons or the Export RPC", *dbPath)
	}
	if err != nil {
		return err
	}
	defer db.Close()
	var policyText []byte
	if *policy != "" {
		if policyText, err = os.ReadFile(*policy); err != nil {
			return err
		}
		if _, err := export.ParsePolicy(policyText); err != nil {
			return fmt.Errorf("%s: %w", *policy, err)
		}
	}
	if *all {
		return m.exportTerm(db, policyText, *out)
	}
	if *session == 0 {
		ss, err := db.Sessions()
		if err != nil {
			return err
		}
		fmt.Fprintln(m.Stderr, "give --session; the sessions in this file:")
		for _, s := range ss {
			fmt.Fprintf(m.Stderr, "  %d  %s  (%s)\n", s.ID, s.Title, s.CreatedAt.Format("2006-01-02 15:04"))
		}
		return usageError{"export: --session is required"}
	}
	d, err := db.ReadSession(*session)
	if errors.Is(err, store.ErrNotFound) {
		return usageError{fmt.Sprintf("export: no session %d in %s", *session, *dbPath)}
	}
	if err != nil {
		return err
	}
	if policyText != nil {
		d.Session.GradingPolicy = string(policyText)
	}
	ex, err := export.Prepare(d)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	name, _, err := export.Write(&buf, ex, export.Format(strings.ToLower(*format)))
	if err != nil {
		return err
	}
	return m.writeOut(*out, name, buf.Bytes())
}

func (m *Main) writeOut(out, name string, b []byte) error {
	if out == "-" {
		_, err := m.Stdout.Write(b)
		return err
	}
	if err := os.WriteFile(out, b, 0o644); err != nil {
		return err
	}
	fmt.Fprintf(m.Stderr, "wrote %s (%d bytes; suggested name %s)\n", out, len(b), name)
	return nil
}

// exportTerm writes one gradebook for every session in the file.
func (m *Main) exportTerm(db *store.DB, policy []byte, out string) error {
	sessions, err := db.Sessions()
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	err = export.WriteTermGradebookCSV(&buf, func(yield func(export.Session, error) bool) {
		for i := len(sessions) - 1; i >= 0; i-- { // oldest first
			d, err := db.ReadSession(sessions[i].ID)
			if err == nil && policy != nil {
				d.Session.GradingPolicy = string(policy)
			}
			var ex export.Session
			if err == nil {
				ex, err = export.Prepare(d)
			}
			if !yield(ex, err) {
				return
			}
		}
	})
	if err != nil {
		return err
	}
	return m.writeOut(out, "fluxroom-term-gradebook.csv", buf.Bytes())
}
