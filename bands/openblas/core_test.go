package openblas

import "testing"

// The kernel names are OpenBLAS's (openblas_get_corename, the names
// OPENBLAS_CORETYPE accepts, from its documentation of DYNAMIC_ARCH builds).
func TestReplacement(t *testing.T) {
	for _, c := range []struct {
		core string
		f    features
		want string
	}{
		{"Prescott", features{avx512: true, avx2: true}, "SkylakeX"},
		{"Prescott", features{avx2: true}, "Haswell"},
		{"Prescott", features{}, ""}, // an old CPU: its kernel stands
		{"Sandybridge", features{avx2: true}, "Haswell"},
		{"Haswell", features{avx512: true, avx2: true}, ""}, // recognised well enough
		{"SkylakeX", features{avx512: true, avx2: true}, ""},
		{"Zen", features{avx2: true}, ""},
		{"", features{avx512: true, avx2: true}, ""}, // built without cgo
	} {
		if got := replacement(c.core, c.f); got != c.want {
			t.Errorf("replacement(%q, %+v) = %q, want %q", c.core, c.f, got, c.want)
		}
	}
}

func TestReplacementCoreKeepsTheUsersChoice(t *testing.T) {
	t.Setenv(CoreEnv, "Prescott")
	if got := ReplacementCore(); got != "" {
		t.Errorf("ReplacementCore() with %s set = %q, want \"\"", CoreEnv, got)
	}
}
