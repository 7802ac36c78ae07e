package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"strings"

	"example.com/fluxroom/internal/export"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// exportCmd writes a session's gradebook, readings, JSON or report from the
// database file, or from a running server (--server, over the Export RPC),
// which holds the file's lock while it runs.
func (m *Main) exportCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("export")
	dbPath := fs.String("db", "fluxroom-data/fluxroom.db", "the bbolt database file, when no server runs")
	addr := fs.String("server", "", "a running server, host:port: export over its Export RPC")
	key := keyFlag(fs)
	client := addClientFlags(fs)
	session := fs.Uint64("session", 0, "the session id (fluxroom export --db … lists them when left out)")
	format := fs.String("format", "csv", "csv (gradebook), readings, json or html")
	out := fs.String("out", "-", "output file, - for standard output")
	policy := fs.String("policy", "", "grade with this policy file instead of the session's")
	all := fs.Bool("all", false, "one gradebook CSV of every session in the file (a term), with the session in front of each row")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *addr != "" {
		if *policy != "" || *all {
			return usageError{"export --server: --policy and --all read the file; a running server grades with each session's own policy"}
		}
		return m.exportFromServer(ctx, client, *addr, *key, *session, *format, *out)
	}
	db, err := openExisting(*dbPath)
	if errors.Is(err, store.ErrLocked) {
		return fmt.Errorf("%s is in use by a running fluxroom server: export with --server from it, or use the dashboard's export buttons", *dbPath)
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

// exportFormats are export's --format names for the Export RPC's formats.
var exportFormats = map[string]pb.ExportFormat{
	"csv": pb.ExportFormat_EXPORT_FORMAT_GRADEBOOK_CSV, "readings": pb.ExportFormat_EXPORT_FORMAT_READINGS_CSV,
	"json": pb.ExportFormat_EXPORT_FORMAT_JSON, "html": pb.ExportFormat_EXPORT_FORMAT_HTML,
}

// exportFromServer asks a running server for a session's export and writes
// it to out ("-": standard output).
func (m *Main) exportFromServer(ctx context.Context, client clientFlags, addr, key string, session uint64, format, out string) error {
	f, ok := exportFormats[format]
	switch {
	case !ok:
		return usageError{fmt.Sprintf("export: --format %q: use csv, readings, json or html", format)}
	case session == 0:
		return usageError{"export --server: --session is required"}
	case key == "":
		return usageError{"export --server: --key is required (your staff key or the administrator's)"}
	}
	conn, err := client.dial(addr, key)
	if err != nil {
		return err
	}
	defer conn.Close()
	res, err := rpcpb.NewInstructorServiceClient(conn).Export(ctx, &pb.ExportRequest{SessionId: session, Format: f})
	if err != nil {
		return fmt.Errorf("export from %s: %w", addr, err)
	}
	if out == "-" {
		_, err = m.Stdout.Write(res.Content)
		return err
	}
	return os.WriteFile(out, res.Content, 0o644)
}
