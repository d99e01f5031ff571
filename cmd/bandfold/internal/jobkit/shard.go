package jobkit

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Shard is task I of an N-task job array; the zero value is the whole job.
type Shard struct{ I, N int }

func (s Shard) OrWhole() Shard {
	if s.N < 1 {
		return Shard{0, 1}
	}
	return s
}

func (s Shard) String() string { s = s.OrWhole(); return fmt.Sprintf("%d/%d", s.I, s.N) }

// ParseShard reads a --shard value: "I/N" with 0 <= I < N, or "auto" to take
// I and N from the scheduler's environment (getenv): a Slurm job array, or a
// Kubernetes Indexed Job (JOB_COMPLETION_INDEX, with N from count). Empty
// means the whole job (0/1).
func ParseShard(spec string, count int, getenv func(string) string) (Shard, error) {
	switch spec = strings.TrimSpace(spec); spec {
	case "":
		return Shard{0, 1}, nil
	case "auto":
		return shardFromEnv(count, getenv)
	}
	is, ns, ok := strings.Cut(spec, "/")
	i, err1 := strconv.Atoi(is)
	n, err2 := strconv.Atoi(ns)
	if !ok || err1 != nil || err2 != nil {
		return Shard{}, Usagef("--shard %q: want I/N (for example 0/4) or auto", spec)
	}
	if n < 1 || i < 0 || i >= n {
		return Shard{}, Usagef("--shard %q: need 0 <= I < N", spec)
	}
	return Shard{i, n}, nil
}

func shardFromEnv(count int, getenv func(string) string) (Shard, error) {
	if id := getenv("SLURM_ARRAY_TASK_ID"); id != "" {
		var vals [4]int
		for i, k := range []string{"SLURM_ARRAY_TASK_ID", "SLURM_ARRAY_TASK_MIN", "SLURM_ARRAY_TASK_MAX", "SLURM_ARRAY_TASK_COUNT"} {
			v, err := strconv.Atoi(getenv(k))
			if err != nil {
				return Shard{}, Usagef("--shard auto: %s=%q is not a number", k, getenv(k))
			}
			vals[i] = v
		}
		task, lo, hi, n := vals[0], vals[1], vals[2], vals[3]
		if hi-lo+1 != n {
			return Shard{}, Usagef("--shard auto: the Slurm array %d-%d has %d tasks: arrays with steps or gaps cannot be mapped to shards; submit --array=0-%d", lo, hi, n, n-1)
		}
		if task < lo || task > hi {
			return Shard{}, Usagef("--shard auto: SLURM_ARRAY_TASK_ID %d outside %d-%d", task, lo, hi)
		}
		return Shard{task - lo, n}, nil
	}
	if idx := getenv("JOB_COMPLETION_INDEX"); idx != "" {
		i, err := strconv.Atoi(idx)
		if err != nil {
			return Shard{}, Usagef("--shard auto: JOB_COMPLETION_INDEX=%q is not a number", idx)
		}
		if count < 1 {
			return Shard{}, Usagef("--shard auto in a Kubernetes Indexed Job needs --shard-count N (the Job's completions)")
		}
		if i < 0 || i >= count {
			return Shard{}, Usagef("--shard auto: JOB_COMPLETION_INDEX %d outside 0-%d", i, count-1)
		}
		return Shard{i, count}, nil
	}
	return Shard{}, Usagef("--shard auto: no job array in the environment (neither SLURM_ARRAY_TASK_ID nor JOB_COMPLETION_INDEX is set)")
}

// Has reports whether item k of a job (its k-th tile) is the shard's: the
// items whose number mod N is I, as NewScan deals them.
func (s Shard) Has(k int) bool { s = s.OrWhole(); return k%s.N == s.I }

// CheckShards verifies that shards, read from the files paths (for
// messages), are one whole job: the same N as the first, each of 0..N-1
// exactly once. Its error is one line naming every file of a foreign N,
// every shard duplicated and every shard missing.
func CheckShards(shards []Shard, paths []string) error {
	if len(shards) != len(paths) {
		panic("jobkit: CheckShards: len(shards) != len(paths)")
	}
	if len(shards) == 0 {
		return errors.New("no shard files")
	}
	n := shards[0].N
	var problems []string
	seen := make(map[int]string)
	for i, s := range shards {
		switch first, dup := seen[s.I]; {
		case s.N != n:
			problems = append(problems, fmt.Sprintf("%s is shard %s, of another split than %s (of %d)", paths[i], s, paths[0], n))
		case dup:
			problems = append(problems, fmt.Sprintf("%s repeats shard %s of %s", paths[i], s, first))
		default:
			seen[s.I] = paths[i]
		}
	}
	for i := range n {
		if _, ok := seen[i]; !ok {
			problems = append(problems, fmt.Sprintf("shard %d/%d is missing", i, n))
		}
	}
	if len(problems) > 0 {
		return errors.New(strings.Join(problems, "; "))
	}
	return nil
}
