package main

import (
	"context"
	"flag"
	"fmt"
	"strconv"
	"strings"
	"text/tabwriter"

	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

const staffHelp = `fluxroom staff: manage the people who hold keys to a running server.

  fluxroom staff add    --server HOST:PORT --key KEY --name NAME [--instructor COURSE]... [--assistant COURSE]...
  fluxroom staff list   --server HOST:PORT --key KEY
  fluxroom staff revoke --server HOST:PORT --key KEY --id N [--course COURSE]
  fluxroom staff rotate --server HOST:PORT --key KEY --id N
  fluxroom staff whoami --server HOST:PORT --key KEY

The administrator's key (the one serve printed at first start) manages
everyone; an instructor's key adds, revokes and rotates the assistants of
their own courses; anyone may rotate their own key. A new key is printed
once: the server keeps only its hash. revoke --course removes only the
role in that course (an assistant leaving one of their courses). Adding a name that already has an
account adds the roles to it and leaves its key as it was.
`

// courseList is a repeatable flag of course names.
type courseList []string

func (c *courseList) String() string { return strings.Join(*c, ", ") }
func (c *courseList) Set(v string) error {
	*c = append(*c, v)
	return nil
}

func (m *Main) staffCmd(ctx context.Context, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprint(m.Stdout, staffHelp)
		if len(args) == 0 {
			return usageError{"staff: give add, list, revoke, rotate or whoami"}
		}
		return nil
	}
	sub := args[0]
	fs := m.newFlags("staff " + sub)
	addr := fs.String("server", "", "a running server, host:port")
	key := keyFlag(fs)
	client := addClientFlags(fs)
	var name, course *string
	var id *uint64
	var instructs, assists courseList
	switch sub {
	case "add":
		name = fs.String("name", "", "the person's name as colleagues know it; the audit log shows it")
		fs.Var(&instructs, "instructor", "a course the person instructs (repeat for several)")
		fs.Var(&assists, "assistant", "a course the person assists in (repeat for several)")
	case "revoke", "rotate":
		id = fs.Uint64("id", 0, "the account's id, as staff list shows it")
		if sub == "revoke" {
			course = fs.String("course", "", "remove only the role in this course; the key keeps working for the others")
		}
	case "list", "whoami":
	default:
		fmt.Fprint(m.Stderr, staffHelp)
		return usageError{fmt.Sprintf("staff: unknown command %q", sub)}
	}
	if err := parse(fs, args[1:]); err != nil {
		return err
	}
	switch {
	case *addr == "":
		return usageError{"staff " + sub + ": --server is required"}
	case *key == "":
		return usageError{"staff " + sub + ": --key is required (the administrator's key, or an instructor's for their assistants)"}
	case id != nil && *id == 0:
		return usageError{"staff " + sub + ": --id is required (see fluxroom staff list)"}
	}
	conn, err := client.dial(*addr, *key)
	if err != nil {
		return err
	}
	defer conn.Close()
	c := rpcpb.NewStaffServiceClient(conn)
	scheme := "http"
	if *client.tls || *client.tlsCA != "" {
		scheme = "https"
	}
	showKey := func(who *pb.StaffMember, key string) {
		fmt.Fprintf(m.Stdout, "%s (id %d): %s\n\nKey (shown once; only its hash is stored):\n\n    %s\n\nOpen the dashboard with it: %s://%s/#key=%s\n",
			who.Name, who.StaffId, rolesText(who.Roles), key, scheme, *addr, key)
	}
	switch sub {
	case "add":
		req := &pb.AddStaffRequest{Name: *name}
		for _, course := range instructs {
			req.Roles = append(req.Roles, &pb.CourseRole{Course: course, Role: pb.StaffRole_STAFF_ROLE_INSTRUCTOR})
		}
		for _, course := range assists {
			req.Roles = append(req.Roles, &pb.CourseRole{Course: course, Role: pb.StaffRole_STAFF_ROLE_ASSISTANT})
		}
		res, err := c.AddStaff(ctx, req)
		if err != nil {
			return fmt.Errorf("staff add: %w", err)
		}
		if res.Key == "" {
			fmt.Fprintf(m.Stdout, "%s (id %d) already has an account; it is now %s. Their key is unchanged.\n", res.Staff.Name, res.Staff.StaffId, rolesText(res.Staff.Roles))
			return nil
		}
		showKey(res.Staff, res.Key)
	case "list":
		res, err := c.ListStaff(ctx, &pb.ListStaffRequest{})
		if err != nil {
			return fmt.Errorf("staff list: %w", err)
		}
		w := tabwriter.NewWriter(m.Stdout, 0, 4, 2, ' ', 0)
		fmt.Fprintln(w, "id\tname\troles\tkey")
		for _, s := range res.Staff {
			state := "active"
			if s.Revoked {
				state = "revoked"
			}
			fmt.Fprintf(w, "%d\t%s\t%s\t%s\n", s.StaffId, s.Name, rolesText(s.Roles), state)
		}
		return w.Flush()
	case "revoke":
		res, err := c.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: *id, Course: *course})
		if err != nil {
			return fmt.Errorf("staff revoke: %w", err)
		}
		if !res.Staff.Revoked {
			fmt.Fprintf(m.Stdout, "Removed the role of %s (id %d) in %q; they are now %s, with the same key.\n", res.Staff.Name, res.Staff.StaffId, *course, rolesText(res.Staff.Roles))
			return nil
		}
		fmt.Fprintf(m.Stdout, "Revoked the key of %s (id %d); it stopped working at once, open rooms too.\n", res.Staff.Name, res.Staff.StaffId)
	case "rotate":
		res, err := c.RotateStaffKey(ctx, &pb.RotateStaffKeyRequest{StaffId: *id})
		if err != nil {
			return fmt.Errorf("staff rotate: %w", err)
		}
		showKey(res.Staff, res.Key)
	case "whoami":
		res, err := c.WhoAmI(ctx, &pb.WhoAmIRequest{})
		if err != nil {
			return fmt.Errorf("staff whoami: %w", err)
		}
		if res.Administrator {
			fmt.Fprintln(m.Stdout, "the administrator: every course, and staff accounts")
			return nil
		}
		fmt.Fprintf(m.Stdout, "%s (id %d): %s\n", res.Name, res.StaffId, rolesText(res.Roles))
	}
	return nil
}

// rolesText is "instructor of PHY 214; assistant of PHY 118".
func rolesText(roles []*pb.CourseRole) string {
	var parts []string
	for _, r := range roles {
		parts = append(parts, string(wire.RoleFromPB(r.Role))+" of "+strconv.Quote(r.Course))
	}
	return strings.Join(parts, "; ")
}

var _ flag.Value = (*courseList)(nil)
