package store

import (
	"bytes"
	"crypto/sha256"
	"os"
	"path/filepath"
	"testing"

	"example.com/fluxroom/domain"
)

// testdata/store/schema-v2.db was written by the schema-2 store: two
// sessions ("PHY 214 Fields lab, section 2", "PHY 118 Magnetism, section
// 1") of two benches with five readings each, a note and a grade override
// each, and the instructor key "schema2-instructor-key".
func TestUpgradeFromSchema2(t *testing.T) {
	path := copyFixture(t, "schema-v2.db")
	if v, _ := schemaOf(t, path); v != 2 {
		t.Fatalf("fixture: schema %d, want 2", v)
	}
	for round := 0; round < 2; round++ { // the second open finds nothing to do
		db, err := Open(path, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if err := db.Check(); err != nil {
			t.Error(err)
		}
		// The instructor key is the administrator's now.
		hash, _, err := db.Credentials(func() []byte { return nil })
		if want := sha256.Sum256([]byte("schema2-instructor-key")); err != nil || !bytes.Equal(hash, want[:]) {
			t.Errorf("administrator's key hash %x, %v; want the old instructor key's", hash, err)
		}
		ss, err := db.Sessions()
		if err != nil || len(ss) != 2 {
			t.Fatalf("sessions = %d, %v; want 2", len(ss), err)
		}
		for _, s := range ss {
			if s.Course != s.Title || s.Course == "" {
				t.Errorf("session %d %q: course %q, want its title", s.ID, s.Title, s.Course)
			}
			d, err := db.ReadSession(s.ID)
			if err != nil {
				t.Fatal(err)
			}
			if len(d.Benches) != 2 || len(d.Notes) != 2 || len(d.Readings[d.Benches[0].ID]) != 5 {
				t.Errorf("session %d: %d benches, %d notes, %d readings on the first; want 2, 2, 5", s.ID, len(d.Benches), len(d.Notes), len(d.Readings[d.Benches[0].ID]))
			}
			if o := domain.Overrides(d.Notes)[d.Benches[1].ID]; len(o) != 1 || o[0].Author != "M. Okonkwo-Hale" || o[0].Points != 80 {
				t.Errorf("session %d: overrides %+v; want one of 80 points by M. Okonkwo-Hale", s.ID, o)
			}
		}
		if staff, err := db.StaffAccounts(); err != nil || len(staff) != 0 {
			t.Errorf("staff after the upgrade: %v, %v; want none", staff, err)
		}
		if err := db.Close(); err != nil {
			t.Fatal(err)
		}
		if v, _ := schemaOf(t, path); v != SchemaVersion {
			t.Errorf("after open: schema %d, want %d", v, SchemaVersion)
		}
	}
}

func TestStaffAccounts(t *testing.T) {
	db, path := openTemp(t)
	h1, h2 := sha256.Sum256([]byte("k1")), sha256.Sum256([]byte("k2"))
	a, err := db.AddStaff(domain.Staff{Name: "Rosalind Achterberg", Roles: map[string]domain.Role{"PHY 214": domain.RoleInstructor}, CreatedAt: t0}, h1[:])
	if err != nil || a.ID == 0 {
		t.Fatalf("add: %+v, %v", a, err)
	}
	b, err := db.AddStaff(domain.Staff{Name: "Teo Vasquez-Lind", Roles: map[string]domain.Role{"PHY 214": domain.RoleAssistant, "PHY 118": domain.RoleAssistant}}, h2[:])
	if err != nil || b.ID == a.ID {
		t.Fatalf("add second: %+v, %v", b, err)
	}
	if _, err := db.UpdateStaff(b.ID, true, nil); err != nil {
		t.Fatal(err)
	}
	h3 := sha256.Sum256([]byte("k3"))
	if got, err := db.UpdateStaff(a.ID, false, h3[:]); err != nil || !bytes.Equal(got.KeyHash, h3[:]) {
		t.Fatalf("rotate: %+v, %v", got, err)
	}
	if _, err := db.UpdateStaff(99, true, nil); err == nil {
		t.Error("updating staff 99 succeeded")
	}
	db.Close()
	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	all, err := db.StaffAccounts()
	if err != nil || len(all) != 2 {
		t.Fatalf("staff = %v, %v; want 2", all, err)
	}
	if all[0].Name != "Rosalind Achterberg" || !bytes.Equal(all[0].KeyHash, h3[:]) || all[0].Revoked || !all[0].CreatedAt.Equal(t0) {
		t.Errorf("first account %+v", all[0])
	}
	if !all[1].Revoked || all[1].Roles["PHY 118"] != domain.RoleAssistant || len(all[1].Roles) != 2 {
		t.Errorf("second account %+v; want revoked, assistant of two courses", all[1])
	}
}

// A course's backup holds its own sessions, whole and with their ids, and
// nothing of the others': no session, join code, bench, reading or note,
// and no staff account or key.
func TestBackupSessions(t *testing.T) {
	db, _ := openTemp(t)
	defer db.Close()
	h := sha256.Sum256([]byte("k"))
	if _, err := db.AddStaff(domain.Staff{Name: "Rosalind Achterberg", Roles: map[string]domain.Role{"PHY 214": domain.RoleInstructor}}, h[:]); err != nil {
		t.Fatal(err)
	}
	var ids []uint64
	for i, course := range []string{"PHY 214", "PHY 118", "PHY 214"} {
		s, err := db.CreateSession(domain.Session{Title: course + " s" + string(rune('1'+i)), Course: course, JoinCode: "JC" + string(rune('A'+i)) + "XYZ", CreatedAt: t0})
		if err != nil {
			t.Fatal(err)
		}
		bs, err := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}})
		if err != nil {
			t.Fatal(err)
		}
		for k := 0; k < 3; k++ {
			if _, _, err := db.AppendReading(s.ID, bs[0].ID, domain.Reading{ID: "r" + string(rune('a'+k)), Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 1, Unit: "A"}})}); err != nil {
				t.Fatal(err)
			}
		}
		if err := db.AppendNote(s.ID, domain.Note{Kind: domain.NoteKindBenchesSet, Text: "set up 1 bench(es): A1", Author: "Rosalind Achterberg", StaffID: 1, At: t0}); err != nil {
			t.Fatal(err)
		}
		ids = append(ids, s.ID)
	}
	var buf bytes.Buffer
	var size int64
	n, err := db.BackupSessions(&buf, []uint64{ids[0], ids[2]}, func(s int64) { size = s })
	if err != nil || n != int64(buf.Len()) || size != n {
		t.Fatalf("backup: %d bytes (told %d, have %d), %v", n, size, buf.Len(), err)
	}
	path := filepath.Join(t.TempDir(), "course.db")
	if err := os.WriteFile(path, buf.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
	part, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer part.Close()
	if err := part.Check(); err != nil {
		t.Error(err)
	}
	ss, err := part.Sessions()
	if err != nil || len(ss) != 2 {
		t.Fatalf("sessions in the course's backup: %d, %v; want 2", len(ss), err)
	}
	for _, s := range ss {
		if s.Course != "PHY 214" || (s.ID != ids[0] && s.ID != ids[2]) {
			t.Errorf("session %d of course %q in the backup", s.ID, s.Course)
		}
		d, err := part.ReadSession(s.ID)
		if err != nil || len(d.Benches) != 1 || len(d.Readings[d.Benches[0].ID]) != 3 || len(d.Notes) != 1 || d.Notes[0].StaffID != 1 {
			t.Errorf("session %d in the backup: %+v, %v", s.ID, d, err)
		}
		if _, err := part.SessionByJoinCode(s.JoinCode); err != nil {
			t.Errorf("join code %s: %v", s.JoinCode, err)
		}
	}
	if _, err := part.SessionByJoinCode("JCBXYZ"); err == nil {
		t.Error("the other course's join code is in the backup")
	}
	if staff, _ := part.StaffAccounts(); len(staff) != 0 {
		t.Errorf("staff accounts in a course's backup: %v", staff)
	}
	if hash, _, _ := part.Credentials(func() []byte { return []byte("s") }); len(hash) != 0 {
		t.Error("the administrator's key hash is in a course's backup")
	}
	// Ids made in the copy later do not clash with the copied ones.
	s, err := part.CreateSession(domain.Session{Title: "next", Course: "PHY 214", JoinCode: "NEXT22"})
	if err != nil || s.ID <= ids[2] {
		t.Errorf("new session in the backup: id %d, %v; want above %d", s.ID, err, ids[2])
	}
}
