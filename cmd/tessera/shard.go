package main

import (
	"fmt"
	"strconv"
	"strings"
)

// shard is share K of N (1-based K); N = 0 means the whole list.
type shard struct{ K, N int }

func (s shard) String() string { return fmt.Sprintf("%d/%d", s.K, s.N) }

// keeps reports whether the i-th item (0-based) of the sorted input list
// belongs to this share. Position modulo N gives every share the same count
// to within one, which keeps the slowest array task short.
func (s shard) keeps(i int) bool { return s.N == 0 || i%s.N == s.K-1 }

// maxShards bounds N so that a typo does not make millions of empty shares.
const maxShards = 1 << 20

// parseShard reads "K/N" with 1 <= K <= N. Only plain decimal digits are
// taken: no signs, spaces or hex, so a script's mistake is not read as
// some other share.
func parseShard(s string) (shard, error) {
	ks, ns, ok := strings.Cut(s, "/")
	if !ok {
		return shard{}, fmt.Errorf("--shard %q: expected K/N (e.g. 2/8) or auto", s)
	}
	k, err1 := parseCount(ks)
	n, err2 := parseCount(ns)
	if err1 != nil || err2 != nil {
		return shard{}, fmt.Errorf("--shard %q: K and N must be whole numbers, as in 2/8", s)
	}
	if n < 1 || n > maxShards {
		return shard{}, fmt.Errorf("--shard %q: N must be 1..%d", s, maxShards)
	}
	if k < 1 || k > n {
		return shard{}, fmt.Errorf("--shard %q: K must be 1..%d (shares are counted from 1)", s, n)
	}
	return shard{k, n}, nil
}

// parseCount reads a non-negative decimal of at most 9 digits.
func parseCount(s string) (int, error) {
	if s == "" || len(s) > 9 {
		return 0, strconv.ErrSyntax
	}
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return 0, strconv.ErrSyntax
		}
	}
	return strconv.Atoi(s)
}

// autoShard takes the share from a job scheduler's environment: a Slurm job
// array (SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT, made 0-based with
// SLURM_ARRAY_TASK_MIN and divided by SLURM_ARRAY_TASK_STEP when set) or a
// Kubernetes Indexed Job (JOB_COMPLETION_INDEX, 0-based, with N from
// --shard-count). count > 0 overrides the scheduler's task count.
func autoShard(getenv func(string) string, count int) (shard, error) {
	if id := getenv("SLURM_ARRAY_TASK_ID"); id != "" {
		idx, err := envInt("SLURM_ARRAY_TASK_ID", id)
		if err != nil {
			return shard{}, err
		}
		if v := getenv("SLURM_ARRAY_TASK_MIN"); v != "" {
			lo, err := envInt("SLURM_ARRAY_TASK_MIN", v)
			if err != nil {
				return shard{}, err
			}
			idx -= lo
		}
		if v := getenv("SLURM_ARRAY_TASK_STEP"); v != "" {
			step, err := envInt("SLURM_ARRAY_TASK_STEP", v)
			if err != nil {
				return shard{}, err
			}
			if step > 1 {
				if idx%step != 0 {
					return shard{}, fmt.Errorf("--shard auto: SLURM_ARRAY_TASK_ID %s is not on the array's step %d; give --shard K/N", id, step)
				}
				idx /= step
			}
		}
		n := count
		if n == 0 {
			v := getenv("SLURM_ARRAY_TASK_COUNT")
			if v == "" {
				return shard{}, fmt.Errorf("--shard auto: SLURM_ARRAY_TASK_ID is set but SLURM_ARRAY_TASK_COUNT is not; give --shard-count N")
			}
			if n, err = envInt("SLURM_ARRAY_TASK_COUNT", v); err != nil {
				return shard{}, err
			}
		}
		return autoCheck(idx, n, "the Slurm array index (SLURM_ARRAY_TASK_ID minus SLURM_ARRAY_TASK_MIN)",
			"submit the array as one contiguous range such as --array=0-7, or give --shard K/N")
	}
	if v := getenv("JOB_COMPLETION_INDEX"); v != "" {
		idx, err := envInt("JOB_COMPLETION_INDEX", v)
		if err != nil {
			return shard{}, err
		}
		if count == 0 {
			return shard{}, fmt.Errorf("--shard auto: JOB_COMPLETION_INDEX is set; also give --shard-count N (the Job's completions)")
		}
		return autoCheck(idx, count, "JOB_COMPLETION_INDEX", "set --shard-count to the Job's completions")
	}
	return shard{}, fmt.Errorf("--shard auto: neither SLURM_ARRAY_TASK_ID nor JOB_COMPLETION_INDEX is set; run inside a job array or give --shard K/N")
}

func autoCheck(idx, n int, what, fix string) (shard, error) {
	if n < 1 || n > maxShards {
		return shard{}, fmt.Errorf("--shard auto: the share count %d must be 1..%d", n, maxShards)
	}
	if idx < 0 || idx >= n {
		return shard{}, fmt.Errorf("--shard auto: %s is %d, outside 0..%d; %s", what, idx, n-1, fix)
	}
	return shard{idx + 1, n}, nil
}

func envInt(name, v string) (int, error) {
	n, err := parseCount(strings.TrimSpace(v))
	if err != nil {
		return 0, fmt.Errorf("--shard auto: %s=%q is not a whole number", name, v)
	}
	return n, nil
}
