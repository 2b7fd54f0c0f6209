package clinic

import "testing"

func TestIsControl(t *testing.T) {
	for _, tt := range []struct {
		group string
		want  bool
	}{
		{"control", true}, {"Control", true}, {" CONTROL ", true},
		{"patient", false}, {"", false}, {"controls", false}, {"non-control", false},
	} {
		if got := (Patient{Group: tt.group}).IsControl(); got != tt.want {
			t.Errorf("group %q: IsControl %v, want %v", tt.group, got, tt.want)
		}
	}
}
