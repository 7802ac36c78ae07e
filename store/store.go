package store

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"sync"
	"sync/atomic"
	"time"

	"go.etcd.io/bbolt"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/proto/recordpb"
)

// Errors callers test with errors.Is.
var (
	ErrNotFound = errors.New("store: not found")
	// ErrConflict means the write would break a uniqueness rule (a bench
	// label or join code already in use).
	ErrConflict = errors.New("store: conflict")
	// ErrSchema means the file was written by a newer fluxroom.
	ErrSchema = errors.New("store: unsupported schema version")
	// ErrLocked means another process (a running server) holds the file
	// and did not let go within Options.Timeout.
	ErrLocked = errors.New("store: the file is in use by another process")
)

// openBolt opens the bbolt file, naming a lock held elsewhere ErrLocked so
// that callers need not know bbolt.
func openBolt(path string, opts *bbolt.Options) (*bbolt.DB, error) {
	b, err := bbolt.Open(path, 0o600, opts)
	if errors.Is(err, bbolt.ErrTimeout) {
		return nil, fmt.Errorf("store: open %s: %w", path, ErrLocked)
	}
	if err != nil {
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	return b, nil
}

// DB is the fluxroom database: one bbolt file.
type DB struct {
	bolt *bbolt.DB
	// queueMu guards the readings waiting for a commit and whether one of
	// their callers is committing (see AppendReading).
	queueMu    sync.Mutex
	queue      []appendReq
	committing bool
	// spare is the leader's list for its group, reused commit after
	// commit; only the caller committing touches it.
	spare []appendReq
	// ids is the committers' index of reading ids (see ids.go).
	ids readingIDs
	// closeMu is held for reading by every AppendReading and for writing
	// by Close, which so waits for the commits under way.
	closeMu sync.RWMutex
	closed  bool
	// onCommit, when set, hears of every group commit of readings.
	onCommit atomic.Pointer[func(readings int, took time.Duration)]
}

// OnCommit has fn told, after every group commit of readings, how many
// readings it held and how long bbolt's commit took with its fsyncs, for
// the server's metrics: acknowledgements wait for it.
func (db *DB) OnCommit(fn func(readings int, took time.Duration)) { db.onCommit.Store(&fn) }

// appendReq is one reading waiting for the group commit.
type appendReq struct {
	sessionID, benchID uint64
	r                  domain.Reading
	done               chan appendRes
}

type appendRes struct {
	stored    domain.Reading
	duplicate bool
	err       error
	// lead, instead of a result, hands the committing on to the caller.
	lead bool
}

// maxGroup bounds how many readings one commit takes.
const maxGroup = 512

// appendFill is the fill of the append-only buckets' pages. Keys arrive in
// order at the end of each session's range, so a split page is never
// written into again below its last key.
const appendFill = 1.0

// initialMmap is a term of readings at the measured ≈ 200 bytes each, with
// room to spare: 1 GiB.
const initialMmap = 1 << 30

// Options tune Open. The zero value is a sensible default.
type Options struct {
	// Timeout bounds the wait for the file lock; another fluxroom holding
	// the file makes Open fail instead of hang. Default 1 s.
	Timeout time.Duration
	// ReadOnly opens an existing file to read or check it, changing
	// nothing: no buckets are made and an older schema is not upgraded
	// (reads of it are then not supported; Check is). It waits for a
	// server holding the file like any other Open.
	ReadOnly bool
}

// Open opens or creates the database at path, creates missing buckets and
// checks the schema version, upgrading an older file.
func Open(path string, opts Options) (*DB, error) {
	if opts.Timeout == 0 {
		opts.Timeout = time.Second
	}
	if opts.ReadOnly {
		return openReadOnly(path, opts)
	}
	// A remap of the file waits for every open read transaction and holds
	// up the writer meanwhile: map more than a term's file from the start,
	// so it does not happen in class. It is address space, not memory.
	b, err := openBolt(path, &bbolt.Options{Timeout: opts.Timeout, InitialMmapSize: initialMmap})
	if err != nil {
		return nil, err
	}
	db := &DB{bolt: b}
	if err := b.Update(db.prepare); err != nil {
		b.Close()
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	return db, nil
}

func openReadOnly(path string, opts Options) (*DB, error) {
	if _, err := os.Stat(path); err != nil {
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	b, err := openBolt(path, &bbolt.Options{Timeout: opts.Timeout, ReadOnly: true})
	if err != nil {
		return nil, err
	}
	err = b.View(func(tx *bbolt.Tx) error {
		meta := tx.Bucket(bucketMeta)
		if meta == nil {
			return errors.New("not a fluxroom database (no meta bucket)")
		}
		v, err := decodeU64(meta.Get(keySchemaVersion))
		if err != nil {
			return err
		}
		if v > SchemaVersion {
			return fmt.Errorf("%w: the file has schema version %d and this fluxroom reads up to %d; use a newer fluxroom", ErrSchema, v, SchemaVersion)
		}
		return nil
	})
	if err != nil {
		b.Close()
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	return &DB{bolt: b, closed: true}, nil
}

// commit writes a group of readings in one transaction and sends each
// its result, only after bbolt's commit (and its fsync) returned, so
// nothing is acknowledged before it is on disk.
func (db *DB) commit(group []appendReq) {
	results := make([]appendRes, len(group))
	// Ids taken by this group; taken back if the commit fails.
	type taken struct {
		s         *sessionIDs
		benchID   uint64
		readingID string
	}
	var took []taken
	now := time.Now()
	var commitStart time.Time
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		// bbolt commits, and fsyncs, when this returns.
		defer func() { commitStart = time.Now() }()
		for i, req := range group {
			ids, err := db.ids.session(tx, req.sessionID, now)
			if err != nil {
				results[i].err = err
				continue
			}
			results[i].stored, results[i].duplicate, results[i].err = appendOne(tx, ids, req.sessionID, req.benchID, req.r)
			if results[i].err == nil && !results[i].duplicate {
				took = append(took, taken{ids, req.benchID, req.r.ID})
			}
		}
		return nil
	})
	if err != nil {
		for _, t := range took {
			t.s.remove(t.benchID, t.readingID)
		}
	}
	// Told before the answers go, so a reading acknowledged is a reading
	// counted.
	if fn := db.onCommit.Load(); fn != nil && err == nil {
		(*fn)(len(group), time.Since(commitStart))
	}
	for i, req := range group {
		if err != nil {
			results[i] = appendRes{err: err}
		}
		req.done <- results[i]
	}
	db.ids.sweep(now)
}

// lead commits the readings waiting, its caller's among them, in one
// group of at most maxGroup, then hands the committing to the first
// caller still waiting, or ends it when none is.
func (db *DB) lead() {
	db.queueMu.Lock()
	n := min(len(db.queue), maxGroup)
	group := append(db.spare[:0], db.queue[:n]...)
	rest := copy(db.queue, db.queue[n:])
	clear(db.queue[rest:]) // let the committed readings go
	db.queue = db.queue[:rest]
	db.queueMu.Unlock()
	db.commit(group)
	clear(group)
	db.queueMu.Lock()
	db.spare = group[:0]
	if len(db.queue) == 0 {
		db.committing = false
		db.queueMu.Unlock()
		return
	}
	next := db.queue[0]
	db.queueMu.Unlock()
	next.done <- appendRes{lead: true}
}

func (db *DB) prepare(tx *bbolt.Tx) error {
	for _, name := range allBuckets {
		if _, err := tx.CreateBucketIfNotExists(name); err != nil {
			return err
		}
	}
	meta := tx.Bucket(bucketMeta)
	raw := meta.Get(keySchemaVersion)
	if raw == nil {
		return meta.Put(keySchemaVersion, u64(SchemaVersion))
	}
	v, err := decodeU64(raw)
	if err != nil {
		return err
	}
	if v > SchemaVersion {
		return fmt.Errorf("%w: the file has schema version %d and this fluxroom reads up to %d; use a newer fluxroom", ErrSchema, v, SchemaVersion)
	}
	// Older files are upgraded in the opening transaction: all or nothing.
	for ; v < SchemaVersion; v++ {
		if err := upgrades[v](tx); err != nil {
			return fmt.Errorf("store: upgrade schema %d to %d: %w", v, v+1, err)
		}
	}
	return meta.Put(keySchemaVersion, u64(SchemaVersion))
}

// Credentials returns the stored hash of the instructor key and the secret
// that signs station tokens, creating the secret on first use.
func (db *DB) Credentials(newSecret func() []byte) (keyHash, stationSecret []byte, err error) {
	err = db.bolt.Update(func(tx *bbolt.Tx) error {
		meta := tx.Bucket(bucketMeta)
		keyHash = append([]byte(nil), meta.Get(keyAdminKeyHash)...)
		stationSecret = append([]byte(nil), meta.Get(keyStationSecret)...)
		if len(stationSecret) == 0 {
			stationSecret = newSecret()
			return meta.Put(keyStationSecret, stationSecret)
		}
		return nil
	})
	if err != nil {
		return nil, nil, fmt.Errorf("store: credentials: %w", err)
	}
	return keyHash, stationSecret, nil
}

// SetAdminKeyHash replaces the stored hash of the instructor key.
func (db *DB) SetAdminKeyHash(hash []byte) error {
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		return tx.Bucket(bucketMeta).Put(keyAdminKeyHash, hash)
	})
	if err != nil {
		return fmt.Errorf("store: set instructor key: %w", err)
	}
	return nil
}

// Backup writes a consistent copy of the whole file to w from one read
// transaction, while writers go on. size, when not nil, learns the copy's
// size before the first byte. It returns the bytes written.
func (db *DB) Backup(w io.Writer, size func(int64)) (int64, error) {
	var n int64
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		if size != nil {
			size(tx.Size())
		}
		var err error
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("store: backup: %w", err)
	}
	return n, nil
}

// Ping reads the schema version: a cheap sign that the file still answers.
func (db *DB) Ping() error {
	return db.bolt.View(func(tx *bbolt.Tx) error {
		if tx.Bucket(bucketMeta).Get(keySchemaVersion) == nil {
			return errors.New("store: no schema version")
		}
		return nil
	})
}

// Close waits for the commits under way and closes the file; appends
// after it are errors.
func (db *DB) Close() error {
	db.closeMu.Lock()
	db.closed = true
	db.closeMu.Unlock()
	return db.bolt.Close()
}

// UsedBytes is the file up to its last page in use: its size less the
// room bbolt grows it by ahead of need (16 MiB steps past the first few).
func (db *DB) UsedBytes() (int64, error) {
	var n int64
	err := db.bolt.View(func(tx *bbolt.Tx) error { n = tx.Size(); return nil })
	return n, err
}

// Path is the file's path.
func (db *DB) Path() string { return db.bolt.Path() }

// Check runs bbolt's consistency check over the whole file.
func (db *DB) Check() error {
	return db.bolt.View(func(tx *bbolt.Tx) error {
		for err := range tx.Check() {
			return fmt.Errorf("store: check: %w", err)
		}
		return nil
	})
}

// CreateSession stores a new session and assigns its id. The join code must
// not be in use (ErrConflict). audit, when given, goes in the session's
// audit log in the same transaction.
func (db *DB) CreateSession(s domain.Session, audit ...domain.Note) (domain.Session, error) {
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		codes := tx.Bucket(bucketJoinCodes)
		if codes.Get([]byte(s.JoinCode)) != nil {
			return fmt.Errorf("%w: join code in use", ErrConflict)
		}
		sessions := tx.Bucket(bucketSessions)
		id, err := sessions.NextSequence()
		if err != nil {
			return err
		}
		s.ID = id
		if err := putRecord(sessions, sessionKey(id), sessionRecord(s)); err != nil {
			return err
		}
		if err := appendEvents(tx, id, audit); err != nil {
			return err
		}
		return codes.Put([]byte(s.JoinCode), u64(id))
	})
	if err != nil {
		return domain.Session{}, fmt.Errorf("store: create session: %w", err)
	}
	return s, nil
}

// UpdateSession rewrites a session's title, tolerance, station
// visibility, policy and closing; its id, course, join code and creation
// time stay. audit, when given, goes in its audit log in the same
// transaction.
func (db *DB) UpdateSession(s domain.Session, audit ...domain.Note) (domain.Session, error) {
	var out domain.Session
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		old, err := getSession(tx, s.ID)
		if err != nil {
			return err
		}
		old.Title, old.Tolerance, old.StationsSeeVerdicts, old.GradingPolicy = s.Title, s.Tolerance, s.StationsSeeVerdicts, s.GradingPolicy
		old.Closed = s.Closed
		out = old
		if err := appendEvents(tx, s.ID, audit); err != nil {
			return err
		}
		return putRecord(tx.Bucket(bucketSessions), sessionKey(s.ID), sessionRecord(old))
	})
	if err != nil {
		return domain.Session{}, fmt.Errorf("store: update session: %w", err)
	}
	return out, nil
}

// AppendNote adds an entry to a session's audit log: on one bench, or on
// the session with BenchID 0.
func (db *DB) AppendNote(sessionID uint64, n domain.Note) error {
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		if n.BenchID == 0 {
			if _, err := getSession(tx, sessionID); err != nil {
				return err
			}
		} else if _, err := getBench(tx, sessionID, n.BenchID); err != nil {
			return err
		}
		return appendEvents(tx, sessionID, []domain.Note{n})
	})
	if err != nil {
		return fmt.Errorf("store: append note: %w", err)
	}
	return nil
}

// appendEvents adds entries to a session's audit log.
func appendEvents(tx *bbolt.Tx, sessionID uint64, notes []domain.Note) error {
	ev := tx.Bucket(bucketEvents)
	ev.FillPercent = appendFill
	for _, n := range notes {
		seq, err := ev.NextSequence()
		if err != nil {
			return err
		}
		if err := putRecord(ev, eventKey(sessionID, seq), eventRecord(n)); err != nil {
			return err
		}
	}
	return nil
}

// Notes returns a session's audit log in order.
func (db *DB) Notes(sessionID uint64) ([]domain.Note, error) {
	var out []domain.Note
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		var err error
		out, err = listNotes(tx, sessionID)
		return err
	})
	return out, err
}

func listNotes(tx *bbolt.Tx, sessionID uint64) ([]domain.Note, error) {
	var out []domain.Note
	prefix := sessionKey(sessionID)
	c := tx.Bucket(bucketEvents).Cursor()
	for k, v := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = c.Next() {
		if len(k) != 16 {
			return nil, fmt.Errorf("store: corrupt event key of %d bytes", len(k))
		}
		var r recordpb.Event
		if err := proto.Unmarshal(v, &r); err != nil {
			return nil, fmt.Errorf("store: decode event: %w", err)
		}
		out = append(out, noteFromRecord(&r))
	}
	return out, nil
}

// SetMembers records a group's member names on its bench.
func (db *DB) SetMembers(sessionID, benchID uint64, members string, audit ...domain.Note) error {
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		b, err := getBench(tx, sessionID, benchID)
		if err != nil {
			return err
		}
		b.Members = members
		if err := appendEvents(tx, sessionID, audit); err != nil {
			return err
		}
		return putRecord(tx.Bucket(bucketBenches), benchKey(sessionID, benchID), benchRecord(b))
	})
	if err != nil {
		return fmt.Errorf("store: set members: %w", err)
	}
	return nil
}

// SessionData is everything stored about one session, read in one
// transaction: for exports and grading.
type SessionData struct {
	Session  domain.Session
	Benches  []domain.Bench
	Readings map[uint64][]domain.Reading
	Notes    []domain.Note
}

// ImportSession stores a whole session (its benches, readings and notes)
// in one transaction, with new ids: for bulk loads such as a term's worth of
// archived sessions. The join code must be free.
func (db *DB) ImportSession(d SessionData) (uint64, error) {
	var sid uint64
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		codes := tx.Bucket(bucketJoinCodes)
		if codes.Get([]byte(d.Session.JoinCode)) != nil {
			return fmt.Errorf("%w: join code in use", ErrConflict)
		}
		sessions, benches, readings, events := tx.Bucket(bucketSessions), tx.Bucket(bucketBenches),
			tx.Bucket(bucketReadings), tx.Bucket(bucketEvents)
		var err error
		if sid, err = sessions.NextSequence(); err != nil {
			return err
		}
		s := d.Session
		s.ID = sid
		if err := putRecord(sessions, sessionKey(sid), sessionRecord(s)); err != nil {
			return err
		}
		if err := codes.Put([]byte(s.JoinCode), u64(sid)); err != nil {
			return err
		}
		newID := map[uint64]uint64{}
		for _, b := range d.Benches {
			old := b.ID
			if b.ID, err = benches.NextSequence(); err != nil {
				return err
			}
			newID[old] = b.ID
			if err := putRecord(benches, benchKey(sid, b.ID), benchRecord(b)); err != nil {
				return err
			}
			for _, r := range d.Readings[old] {
				if r.Sequence, err = readings.NextSequence(); err != nil {
					return err
				}
				if err := putRecord(readings, readingKey(sid, b.ID, r.Sequence), readingRecord(r)); err != nil {
					return err
				}
			}
		}
		for _, n := range d.Notes {
			n.BenchID = newID[n.BenchID]
			seq, err := events.NextSequence()
			if err != nil {
				return err
			}
			if err := putRecord(events, eventKey(sid, seq), eventRecord(n)); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("store: import session: %w", err)
	}
	return sid, nil
}

// ReadSession reads a whole session in one transaction.
func (db *DB) ReadSession(sessionID uint64) (SessionData, error) {
	d := SessionData{Readings: map[uint64][]domain.Reading{}}
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		var err error
		if d.Session, err = getSession(tx, sessionID); err != nil {
			return err
		}
		if d.Benches, err = listBenches(tx, sessionID); err != nil {
			return err
		}
		all, err := sessionReadings(tx, sessionID, 0)
		if err != nil {
			return err
		}
		for _, b := range d.Benches {
			d.Readings[b.ID] = all[b.ID]
		}
		d.Notes, err = listNotes(tx, sessionID)
		return err
	})
	if err != nil {
		return SessionData{}, fmt.Errorf("store: read session %d: %w", sessionID, err)
	}
	return d, nil
}

// Session returns one session.
func (db *DB) Session(id uint64) (domain.Session, error) {
	var s domain.Session
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		var err error
		s, err = getSession(tx, id)
		return err
	})
	return s, err
}

// SessionByJoinCode returns the session a join code belongs to.
func (db *DB) SessionByJoinCode(code string) (domain.Session, error) {
	var s domain.Session
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		raw := tx.Bucket(bucketJoinCodes).Get([]byte(code))
		if raw == nil {
			return fmt.Errorf("%w: join code", ErrNotFound)
		}
		id, err := decodeU64(raw)
		if err != nil {
			return err
		}
		s, err = getSession(tx, id)
		return err
	})
	return s, err
}

// Sessions returns every session, newest first.
func (db *DB) Sessions() ([]domain.Session, error) {
	var out []domain.Session
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		c := tx.Bucket(bucketSessions).Cursor()
		for k, v := c.Last(); k != nil; k, v = c.Prev() {
			var r recordpb.Session
			if err := proto.Unmarshal(v, &r); err != nil {
				return fmt.Errorf("store: decode session: %w", err)
			}
			out = append(out, sessionFromRecord(&r))
		}
		return nil
	})
	return out, err
}

func getSession(tx *bbolt.Tx, id uint64) (domain.Session, error) {
	v := tx.Bucket(bucketSessions).Get(sessionKey(id))
	if v == nil {
		return domain.Session{}, fmt.Errorf("%w: session %d", ErrNotFound, id)
	}
	var r recordpb.Session
	if err := proto.Unmarshal(v, &r); err != nil {
		return domain.Session{}, fmt.Errorf("store: decode session %d: %w", id, err)
	}
	return sessionFromRecord(&r), nil
}

// PutBenches adds benches with ID 0 and updates those with an ID, in one
// transaction, with audit, when given, in the session's audit log. Labels
// stay unique within a session (ErrConflict). Benches not named are kept,
// and not written again. It returns all the session's benches afterwards.
func (db *DB) PutBenches(sessionID uint64, benches []domain.Bench, audit ...domain.Note) ([]domain.Bench, error) {
	var out []domain.Bench
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		if _, err := getSession(tx, sessionID); err != nil {
			return err
		}
		existing, err := listBenches(tx, sessionID)
		if err != nil {
			return err
		}
		byID := map[uint64]domain.Bench{}
		for _, b := range existing {
			byID[b.ID] = b
		}
		bk := tx.Bucket(bucketBenches)
		var added []uint64
		for _, b := range benches {
			if b.ID != 0 {
				if _, ok := byID[b.ID]; !ok {
					return fmt.Errorf("%w: bench %d in session %d", ErrNotFound, b.ID, sessionID)
				}
			} else {
				id, err := bk.NextSequence()
				if err != nil {
					return err
				}
				b.ID = id
				added = append(added, id)
			}
			byID[b.ID] = b
		}
		labels := map[string]uint64{}
		for _, b := range byID {
			if other, dup := labels[b.Label]; dup {
				return fmt.Errorf("%w: label %q used by benches %d and %d", ErrConflict, b.Label, other, b.ID)
			}
			labels[b.Label] = b.ID
		}
		for _, b := range benches {
			if b.ID == 0 {
				continue // given its id above, in byID
			}
			if err := putRecord(bk, benchKey(sessionID, b.ID), benchRecord(byID[b.ID])); err != nil {
				return err
			}
		}
		for _, id := range added {
			if err := putRecord(bk, benchKey(sessionID, id), benchRecord(byID[id])); err != nil {
				return err
			}
		}
		if err := appendEvents(tx, sessionID, audit); err != nil {
			return err
		}
		out, err = listBenches(tx, sessionID)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("store: put benches: %w", err)
	}
	return out, nil
}

// Benches returns a session's benches in id order.
func (db *DB) Benches(sessionID uint64) ([]domain.Bench, error) {
	var out []domain.Bench
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		if _, err := getSession(tx, sessionID); err != nil {
			return err
		}
		var err error
		out, err = listBenches(tx, sessionID)
		return err
	})
	return out, err
}

func listBenches(tx *bbolt.Tx, sessionID uint64) ([]domain.Bench, error) {
	var out []domain.Bench
	prefix := sessionKey(sessionID)
	c := tx.Bucket(bucketBenches).Cursor()
	for k, v := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = c.Next() {
		if _, _, err := decodeBenchKey(k); err != nil {
			return nil, err
		}
		var r recordpb.Bench
		if err := proto.Unmarshal(v, &r); err != nil {
			return nil, fmt.Errorf("store: decode bench: %w", err)
		}
		out = append(out, benchFromRecord(&r))
	}
	return out, nil
}

func getBench(tx *bbolt.Tx, sessionID, benchID uint64) (domain.Bench, error) {
	v := tx.Bucket(bucketBenches).Get(benchKey(sessionID, benchID))
	if v == nil {
		return domain.Bench{}, fmt.Errorf("%w: bench %d in session %d", ErrNotFound, benchID, sessionID)
	}
	var r recordpb.Bench
	if err := proto.Unmarshal(v, &r); err != nil {
		return domain.Bench{}, fmt.Errorf("store: decode bench %d: %w", benchID, err)
	}
	return benchFromRecord(&r), nil
}

// Bench returns one bench.
func (db *DB) Bench(sessionID, benchID uint64) (domain.Bench, error) {
	var b domain.Bench
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		var err error
		b, err = getBench(tx, sessionID, benchID)
		return err
	})
	return b, err
}

// BenchReadings returns one bench and all its readings in arrival order, read
// in one transaction so the two agree.
func (db *DB) BenchReadings(sessionID, benchID uint64) (domain.Bench, []domain.Reading, error) {
	var b domain.Bench
	var rs []domain.Reading
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		var err error
		if b, err = getBench(tx, sessionID, benchID); err != nil {
			return err
		}
		rs, err = listReadings(tx, sessionID, benchID)
		return err
	})
	return b, rs, err
}

func listReadings(tx *bbolt.Tx, sessionID, benchID uint64) ([]domain.Reading, error) {
	all, err := sessionReadings(tx, sessionID, benchID)
	return all[benchID], err
}

// sessionReadings reads a session's readings by bench, each in arrival
// order; with only set, that bench's alone.
func sessionReadings(tx *bbolt.Tx, sessionID, only uint64) (map[uint64][]domain.Reading, error) {
	out := map[uint64][]domain.Reading{}
	err := eachReading(tx, sessionID, only, func(benchID, _ uint64, r *recordpb.Reading) {
		out[benchID] = append(out[benchID], readingFromRecord(r))
	})
	return out, err
}

// eachReading calls fn with every reading of a session in arrival order
// (with only set, that bench's alone), the bench picked out by the key.
func eachReading(tx *bbolt.Tx, sessionID, only uint64, fn func(benchID, seq uint64, r *recordpb.Reading)) error {
	prefix := sessionKey(sessionID)
	c := tx.Bucket(bucketReadings).Cursor()
	for k, v := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = c.Next() {
		_, bid, seq, err := decodeReadingKey(k)
		if err != nil {
			return err
		}
		if only != 0 && bid != only {
			continue
		}
		var r recordpb.Reading
		if err := proto.Unmarshal(v, &r); err != nil {
			return fmt.Errorf("store: decode reading: %w", err)
		}
		fn(bid, seq, &r)
	}
	return nil
}

// AppendReading stores a reading for a bench, in one transaction with its
// id index; it returns once that transaction is committed. When the bench
// already has a reading with the same ID, nothing is written and the stored
// reading is returned with duplicate true.
//
// Concurrent calls share commits (group commit): the caller that finds no
// commit under way commits itself, with whatever readings queued by then,
// and the readings that queue meanwhile go in the next commit, made by the
// first of their callers. A caller on a quiet server so commits its own
// reading on its own goroutine, with no hand-off to a writer and back, and
// one fsync serves many stations on a busy one.
func (db *DB) AppendReading(sessionID, benchID uint64, r domain.Reading) (stored domain.Reading, duplicate bool, err error) {
	db.closeMu.RLock()
	defer db.closeMu.RUnlock()
	if db.closed {
		return domain.Reading{}, false, errors.New("store: append reading: the database is closed")
	}
	done := make(chan appendRes, 1)
	db.queueMu.Lock()
	db.queue = append(db.queue, appendReq{sessionID: sessionID, benchID: benchID, r: r, done: done})
	leader := !db.committing
	db.committing = true
	db.queueMu.Unlock()
	if !leader {
		res := <-done
		if !res.lead {
			return res.result()
		}
	}
	db.lead()
	return (<-done).result()
}

func (res appendRes) result() (domain.Reading, bool, error) {
	if res.err != nil {
		return domain.Reading{}, false, fmt.Errorf("store: append reading: %w", res.err)
	}
	return res.stored, res.duplicate, nil
}

// appendOne writes one reading inside a transaction. It checks everything
// before it writes, so an error leaves the transaction as it was for the
// other readings of the group.
func appendOne(tx *bbolt.Tx, ids *sessionIDs, sessionID, benchID uint64, r domain.Reading) (domain.Reading, bool, error) {
	if tx.Bucket(bucketBenches).Get(benchKey(sessionID, benchID)) == nil {
		return domain.Reading{}, false, fmt.Errorf("%w: bench %d in session %d", ErrNotFound, benchID, sessionID)
	}
	readings := tx.Bucket(bucketReadings)
	// Each new reading goes at the end of its session's range: full pages
	// on a split, where bbolt's default of half-full pages would leave the
	// file half empty.
	readings.FillPercent = appendFill
	if seq, ok := ids.lookup(benchID, r.ID); ok {
		v := readings.Get(readingKey(sessionID, benchID, seq))
		if v == nil {
			return domain.Reading{}, false, fmt.Errorf("store: reading id %q points at missing reading %d", r.ID, seq)
		}
		var rec recordpb.Reading
		if err := proto.Unmarshal(v, &rec); err != nil {
			return domain.Reading{}, false, fmt.Errorf("store: decode reading: %w", err)
		}
		return readingFromRecord(&rec), true, nil
	}
	seq, err := readings.NextSequence()
	if err != nil {
		return domain.Reading{}, false, err
	}
	r.Sequence = seq
	v, err := proto.Marshal(readingRecord(r))
	if err != nil {
		return domain.Reading{}, false, fmt.Errorf("store: encode: %w", err)
	}
	if err := readings.Put(readingKey(sessionID, benchID, seq), v); err != nil {
		return domain.Reading{}, false, err
	}
	ids.add(benchID, r.ID, seq)
	return r, false, nil
}

func putRecord(b *bbolt.Bucket, key []byte, m proto.Message) error {
	v, err := proto.Marshal(m)
	if err != nil {
		return fmt.Errorf("store: encode: %w", err)
	}
	return b.Put(key, v)
}
