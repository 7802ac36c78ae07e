package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// backupCmd makes a consistent copy of the database: from a running server
// over the Backup RPC (hot), or from the file when no server holds it.
func (m *Main) backupCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("backup")
	addr := fs.String("server", "", "a running server, host:port (hot backup)")
	key := keyFlag(fs)
	dbPath := fs.String("db", "", "the database file, when no server is running")
	out := fs.String("out", "", "the backup file to write")
	client := addClientFlags(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	if *out == "" || (*addr == "") == (*dbPath == "") {
		return usageError{"backup: give --out and one of --server (with --key) or --db"}
	}
	tmp := *out + ".partial"
	f, err := os.Create(tmp)
	if err != nil {
		return err
	}
	var n int64
	if *addr != "" {
		n, err = backupFromServer(ctx, client, *addr, *key, f)
	} else {
		var db *store.DB
		db, err = openExisting(*dbPath)
		if errors.Is(err, store.ErrLocked) {
			err = fmt.Errorf("%s is in use by a running server: use --server for a hot backup", *dbPath)
		}
		if err == nil {
			n, err = db.Backup(f, nil)
			db.Close()
		}
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = checkFile(tmp)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("backup: %w", err)
	}
	if err := os.Rename(tmp, *out); err != nil {
		return err
	}
	fmt.Fprintf(m.Stdout, "backup: %s, %d bytes, checked\n", *out, n)
	return nil
}

func backupFromServer(ctx context.Context, client clientFlags, addr, key string, w io.Writer) (int64, error) {
	conn, err := client.dial(addr, key)
	if err != nil {
		return 0, err
	}
	defer conn.Close()
	stream, err := rpcpb.NewInstructorServiceClient(conn).Backup(ctx, &pb.BackupRequest{})
	if err != nil {
		return 0, err
	}
	var n, total int64
	for {
		ch, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return n, err
		}
		if ch.TotalBytes > 0 {
			total = ch.TotalBytes
		}
		k, err := w.Write(ch.Data)
		n += int64(k)
		if err != nil {
			return n, err
		}
	}
	if total > 0 && n != total {
		return n, fmt.Errorf("got %d of %d bytes", n, total)
	}
	return n, nil
}

// checkFile opens a database file read-only, so a backup stays exactly as
// it was written, and runs bbolt's consistency check.
func checkFile(path string) error {
	db, err := store.Open(path, store.Options{ReadOnly: true})
	if err != nil {
		return err
	}
	defer db.Close()
	return db.Check()
}

// restoreCmd puts a backup in place of a database file, after checking it;
// the server must be stopped (the file's lock says so).
func (m *Main) restoreCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("restore")
	from := fs.String("from", "", "the backup file")
	dbPath := fs.String("db", "fluxroom-data/fluxroom.db", "the database file to replace")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *from == "" {
		return usageError{"restore: --from is required"}
	}
	if err := checkFile(*from); err != nil {
		return fmt.Errorf("restore: the backup does not check out: %w", err)
	}
	if _, err := os.Stat(*dbPath); err == nil {
		db, err := store.Open(*dbPath, store.Options{ReadOnly: true})
		if err != nil {
			return fmt.Errorf("restore: %s is in use or damaged (%w); stop the server first", *dbPath, err)
		}
		db.Close()
		kept, err := keepAside(*dbPath)
		if err != nil {
			return err
		}
		fmt.Fprintf(m.Stdout, "restore: the old file is kept as %s\n", kept)
	}
	b, err := os.ReadFile(*from)
	if err != nil {
		return err
	}
	tmp := filepath.Join(filepath.Dir(*dbPath), ".restore-"+filepath.Base(*dbPath))
	if err := os.WriteFile(tmp, b, 0o600); err != nil {
		return err
	}
	if err := os.Rename(tmp, *dbPath); err != nil {
		return err
	}
	fmt.Fprintf(m.Stdout, "restore: %s now holds %s\n", *dbPath, *from)
	return nil
}

// openExisting opens a database file that must already be there: export
// and backup read one, and never make an empty file where a path was
// mistyped.
func openExisting(path string) (*store.DB, error) {
	if _, err := os.Stat(path); errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("--db %s: no such file; nothing was created (give the file a server uses, or --server for a running one)", path)
	} else if err != nil {
		return nil, fmt.Errorf("--db %s: %w", path, err)
	}
	return store.Open(path, store.Options{})
}

// keepAside renames the file a restore replaces to the first free name of
// path.before-restore, path.before-restore.1, .2, …: every earlier file is
// kept, none is overwritten.
func keepAside(path string) (string, error) {
	for i := 0; i < 10000; i++ {
		name := path + ".before-restore"
		if i > 0 {
			name += fmt.Sprintf(".%d", i)
		}
		// Link fails when the name is taken, so a file is never replaced,
		// even by a restore running at the same moment.
		if err := os.Link(path, name); errors.Is(err, os.ErrExist) {
			continue
		} else if err != nil {
			return "", err
		}
		return name, os.Remove(path)
	}
	return "", fmt.Errorf("restore: no free name for %s.before-restore", path)
}
