package jobkit

import (
	"strings"
	"testing"
)

func TestParseShard(t *testing.T) {
	env := func(kv ...string) func(string) string {
		m := map[string]string{}
		for i := 0; i < len(kv); i += 2 {
			m[kv[i]] = kv[i+1]
		}
		return func(k string) string { return m[k] }
	}
	slurm := func(id, lo, hi, n string) func(string) string {
		return env("SLURM_ARRAY_TASK_ID", id, "SLURM_ARRAY_TASK_MIN", lo, "SLURM_ARRAY_TASK_MAX", hi, "SLURM_ARRAY_TASK_COUNT", n)
	}
	tests := []struct {
		name  string
		spec  string
		count int
		env   func(string) string
		want  Shard
		err   string
	}{
		{"none", "", 0, env(), Shard{0, 1}, ""},
		{"explicit", "2/5", 0, env(), Shard{2, 5}, ""},
		{"explicit ignores env", "0/2", 0, slurm("3", "0", "3", "4"), Shard{0, 2}, ""},
		{"I >= N", "5/5", 0, env(), Shard{}, "need 0 <= I < N"},
		{"negative", "-1/3", 0, env(), Shard{}, "need 0 <= I < N"},
		{"malformed", "1-3", 0, env(), Shard{}, "want I/N"},
		{"zero shards", "0/0", 0, env(), Shard{}, "need 0 <= I < N"},
		// Slurm: I is the position of the task id within MIN..MAX.
		{"slurm", "auto", 0, slurm("3", "0", "3", "4"), Shard{3, 4}, ""},
		{"slurm offset array", "auto", 0, slurm("12", "10", "13", "4"), Shard{2, 4}, ""},
		{"slurm stepped array", "auto", 0, slurm("4", "0", "6", "4"), Shard{}, "steps or gaps"},
		{"slurm garbage", "auto", 0, slurm("x", "0", "3", "4"), Shard{}, "is not a number"},
		// Kubernetes Indexed Jobs.
		{"kubernetes", "auto", 4, env("JOB_COMPLETION_INDEX", "1"), Shard{1, 4}, ""},
		{"kubernetes without count", "auto", 0, env("JOB_COMPLETION_INDEX", "1"), Shard{}, "--shard-count"},
		{"kubernetes index too large", "auto", 4, env("JOB_COMPLETION_INDEX", "4"), Shard{}, "outside 0-3"},
		{"no scheduler", "auto", 0, env(), Shard{}, "no job array in the environment"},
	}
	for _, tc := range tests {
		got, err := ParseShard(tc.spec, tc.count, tc.env)
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("%s: got %v, %v; want an error containing %q", tc.name, got, err, tc.err)
			}
			if !IsUsage(err) {
				t.Errorf("%s: %v is not a usage error", tc.name, err)
			}
			continue
		}
		if err != nil || got != tc.want {
			t.Errorf("%s: got %v, %v; want %v", tc.name, got, err, tc.want)
		}
	}
}

func TestParseMinArea(t *testing.T) {
	tests := []struct {
		in      string
		m2, px  float64
		wantErr bool
	}{
		{"0.5ha", 5000, 0, false},
		{"5000m2", 5000, 0, false},
		{"1.2km2", 1.2e6, 0, false},
		{"4px", 0, 4, false},
		{"0", 0, 0, false},
		{" 2 HA ", 20000, 0, false},
		{"4", 0, 0, true},
		{"-1ha", 0, 0, true},
		{"5 acres", 0, 0, true},
		{"ha", 0, 0, true},
	}
	for _, tc := range tests {
		got, err := ParseMinArea(tc.in)
		if (err != nil) != tc.wantErr || got.M2 != tc.m2 || got.Px != tc.px {
			t.Errorf("ParseMinArea(%q) = %+v, %v", tc.in, got, err)
		}
	}
}

func FuzzParseMinArea(f *testing.F) {
	for _, s := range []string{"0.5ha", "4px", "0", "1e3m2", "km2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		m, err := ParseMinArea(s)
		if err == nil && (m.M2 < 0 || m.Px < 0 || m.M2 != m.M2 || m.Px != m.Px) {
			t.Fatalf("ParseMinArea(%q) = %+v", s, m)
		}
	})
}

// FuzzParseShard: any --shard text either fails with a usage error or
// gives 0 <= I < N that prints back to the same value (known by
// construction).
func FuzzParseShard(f *testing.F) {
	for _, s := range []string{"", "0/1", "3/4", "4/4", "auto", "-1/2", "1/0", " 2/3 ", "x/y", "1//2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		sh, err := ParseShard(s, 0, func(string) string { return "" })
		if err != nil {
			if !IsUsage(err) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("ParseShard(%q): %v is not a one-line usage error", s, err)
			}
			return
		}
		if sh.N < 1 || sh.I < 0 || sh.I >= sh.N {
			t.Fatalf("ParseShard(%q) = %v", s, sh)
		}
		again, err := ParseShard(sh.String(), 0, nil)
		if err != nil || again != sh {
			t.Fatalf("ParseShard(%q) = %v, reprinted %v, %v", s, sh, again, err)
		}
	})
}

// TestMinAreaString: a minimum area written back reads as the same area
// (true by construction of the units).
func TestMinAreaString(t *testing.T) {
	for _, s := range []string{"0.5ha", "5000m2", "1km2", "4px", "0"} {
		m, err := ParseMinArea(s)
		if err != nil {
			t.Fatal(err)
		}
		back, err := ParseMinArea(m.String())
		if err != nil || back != m {
			t.Errorf("%s: written %q, read back %+v (%v), want %+v", s, m.String(), back, err, m)
		}
	}
}
