package postgres_test

import (
	"strings"
	"testing"

	"plumb/store/postgres"
)

func TestRedact(t *testing.T) {
	for _, tt := range []struct {
		name, in, want string
		has            bool
	}{
		{"no password", "postgres://plumb@db:5432/plumb?sslmode=verify-full", "postgres://plumb@db:5432/plumb?sslmode=verify-full", false},
		{"user password", "postgres://plumb:hunter2@db:5432/plumb?sslmode=require", "postgres://plumb:xxxxx@db:5432/plumb?sslmode=require", true},
		{"postgresql scheme", "postgresql://u:p%40ss@db/x", "postgresql://u:xxxxx@db/x", true},
		{"password parameter", "postgres://db/x?user=u&password=hunter2", "postgres://db/x?password=xxxxx&user=u", true},
		{"sslpassword parameter", "postgres://u@db/x?sslpassword=k3y", "postgres://u@db/x?sslpassword=xxxxx", true},
		{"empty password", "postgres://u:@db/x", "postgres://u:xxxxx@db/x", true},
		{"unparsable", "postgres://u:hunter2@db:port/x", "postgres://(unreadable URL hidden)", true},
		{"keyword form", "host=db user=u password=hunter2 dbname=x", "host=db user=u password=xxxxx dbname=x", true},
		{"keyword form quoted", "host=db password='a b\\'c' dbname=x", "host=db password=xxxxx dbname=x", true},
		{"keyword form spaced", "host=db password = hunter2", "host=db password=xxxxx", true},
		{"file path", "/var/lib/plumb/history.db", "/var/lib/plumb/history.db", false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			got := postgres.Redact(tt.in)
			if got != tt.want {
				t.Errorf("Redact(%q) = %q, want %q", tt.in, got, tt.want)
			}
			for _, secret := range []string{"hunter2", "p%40ss", "k3y", "a b"} {
				if strings.Contains(got, secret) {
					t.Errorf("Redact(%q) = %q shows %q", tt.in, got, secret)
				}
			}
			if h := postgres.HasPassword(tt.in); h != tt.has {
				t.Errorf("HasPassword(%q) = %v, want %v", tt.in, h, tt.has)
			}
		})
	}
}
