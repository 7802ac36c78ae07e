package store

import (
	"bytes"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"slices"

	"go.etcd.io/bbolt"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/proto/recordpb"
)

// StaffAccount is a staff account with the SHA-256 of its key, for the
// server's key lookup.
type StaffAccount struct {
	domain.Staff
	KeyHash []byte
}

// AddStaff stores a new account with its key's hash and assigns its id.
func (db *DB) AddStaff(s domain.Staff, keyHash []byte) (domain.Staff, error) {
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		b := tx.Bucket(bucketStaff)
		id, err := b.NextSequence()
		if err != nil {
			return err
		}
		s.ID = id
		return putRecord(b, staffKey(id), staffRecord(s, keyHash))
	})
	if err != nil {
		return domain.Staff{}, fmt.Errorf("store: add staff: %w", err)
	}
	return s, nil
}

// StaffAccounts returns every account, revoked ones too, in id order.
func (db *DB) StaffAccounts() ([]StaffAccount, error) {
	var out []StaffAccount
	err := db.bolt.View(func(tx *bbolt.Tx) error {
		return tx.Bucket(bucketStaff).ForEach(func(k, v []byte) error {
			var r recordpb.Staff
			if err := proto.Unmarshal(v, &r); err != nil {
				return fmt.Errorf("decode staff %x: %w", k, err)
			}
			out = append(out, StaffAccount{Staff: staffFromRecord(&r), KeyHash: slices.Clone(r.GetKeySha256())})
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store: staff: %w", err)
	}
	return out, nil
}

// UpdateStaff changes one account: revoked, or a new key hash when
// keyHash is not nil. It returns the account as stored.
func (db *DB) UpdateStaff(id uint64, revoked bool, keyHash []byte) (StaffAccount, error) {
	return db.changeStaff(id, func(r *recordpb.Staff) {
		r.Revoked = revoked
		if keyHash != nil {
			r.KeySha256 = keyHash
		}
	})
}

// changeStaff rewrites one account's record with change applied.
func (db *DB) changeStaff(id uint64, change func(*recordpb.Staff)) (StaffAccount, error) {
	var out StaffAccount
	err := db.bolt.Update(func(tx *bbolt.Tx) error {
		b := tx.Bucket(bucketStaff)
		v := b.Get(staffKey(id))
		if v == nil {
			return fmt.Errorf("%w: staff %d", ErrNotFound, id)
		}
		var r recordpb.Staff
		if err := proto.Unmarshal(v, &r); err != nil {
			return fmt.Errorf("decode staff %d: %w", id, err)
		}
		change(&r)
		out = StaffAccount{Staff: staffFromRecord(&r), KeyHash: slices.Clone(r.GetKeySha256())}
		return putRecord(b, staffKey(id), &r)
	})
	if err != nil {
		return StaffAccount{}, fmt.Errorf("store: update staff: %w", err)
	}
	return out, nil
}

// SetStaffRoles replaces an account's roles.
func (db *DB) SetStaffRoles(id uint64, roles map[string]domain.Role) (StaffAccount, error) {
	return db.changeStaff(id, func(r *recordpb.Staff) {
		r.Roles = staffRecord(domain.Staff{Roles: roles}, nil).Roles
	})
}

// BackupSessions writes a file that holds only the given sessions (their
// benches, readings, join codes and audit logs, with their ids), from one
// read transaction: a course's own backup. It holds no staff accounts and
// no keys; a server started on it makes a new administrator's key. size
// learns the copy's size before the first byte.
func (db *DB) BackupSessions(w io.Writer, sessionIDs []uint64, size func(int64)) (int64, error) {
	dir, err := os.MkdirTemp("", "fluxroom-backup-")
	if err != nil {
		return 0, fmt.Errorf("store: backup sessions: %w", err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "part.db")
	part, err := bbolt.Open(path, 0o600, nil)
	if err != nil {
		return 0, fmt.Errorf("store: backup sessions: %w", err)
	}
	defer part.Close()
	err = db.bolt.View(func(src *bbolt.Tx) error {
		return part.Update(func(dst *bbolt.Tx) error { return copySessions(src, dst, sessionIDs) })
	})
	if err != nil {
		return 0, fmt.Errorf("store: backup sessions: %w", err)
	}
	var n int64
	err = part.View(func(tx *bbolt.Tx) error {
		if size != nil {
			size(tx.Size())
		}
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("store: backup sessions: %w", err)
	}
	return n, nil
}

// copySessions copies the sessions' keys of every per-session bucket, and
// each bucket's sequence so that ids made later in the copy never clash.
func copySessions(src, dst *bbolt.Tx, ids []uint64) error {
	want := map[uint64]bool{}
	for _, id := range ids {
		want[id] = true
	}
	for _, name := range allBuckets {
		s := src.Bucket(name)
		d, err := dst.CreateBucketIfNotExists(name)
		if err != nil {
			return err
		}
		if err := d.SetSequence(s.Sequence()); err != nil {
			return err
		}
		switch {
		case bytes.Equal(name, bucketMeta):
			if err := d.Put(keySchemaVersion, u64(SchemaVersion)); err != nil {
				return err
			}
		case bytes.Equal(name, bucketJoinCodes):
			err = s.ForEach(func(k, v []byte) error {
				if id, err := decodeU64(v); err == nil && want[id] {
					return d.Put(k, v)
				}
				return nil
			})
		case bytes.Equal(name, bucketStaff):
		default: // keyed by session id first
			for _, id := range slices.Sorted(maps.Keys(want)) {
				prefix := sessionKey(id)
				c := s.Cursor()
				for k, v := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = c.Next() {
					if err := d.Put(k, v); err != nil {
						return err
					}
				}
			}
		}
		if err != nil {
			return err
		}
	}
	return nil
}
