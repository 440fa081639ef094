package main

import (
	"bytes"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// copyTree copies every file under src to dst.
func copyTree(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		if e.IsDir() {
			return os.MkdirAll(filepath.Join(dst, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// treeBytes maps every file under root (slash path) to its content.
func treeBytes(t *testing.T, root string) map[string][]byte {
	t.Helper()
	files := map[string][]byte{}
	err := filepath.WalkDir(root, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		files[filepath.ToSlash(rel)] = b
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return files
}

// sameTree fails unless a and b hold the same files with the same bytes.
// It does not use firstDifference, which is under test elsewhere.
func sameTree(t *testing.T, a, b string) {
	t.Helper()
	fa, fb := treeBytes(t, a), treeBytes(t, b)
	var names []string
	for k := range fa {
		names = append(names, k)
	}
	for k := range fb {
		if _, ok := fa[k]; !ok {
			names = append(names, k)
		}
	}
	sort.Strings(names)
	bad := 0
	for _, n := range names {
		x, okA := fa[n]
		y, okB := fb[n]
		switch {
		case !okA:
			t.Errorf("%s only in %s", n, b)
		case !okB:
			t.Errorf("%s only in %s", n, a)
		case !bytes.Equal(x, y):
			t.Errorf("%s differs between %s and %s", n, a, b)
		default:
			continue
		}
		if bad++; bad == 5 {
			t.Fatal("… and maybe more")
		}
	}
	if len(fa) < 5 {
		t.Fatalf("%s holds only %d files", a, len(fa))
	}
}

// genShards writes shards 0..n-1 of the default preset into separate folders.
func genShards(t *testing.T, root string, n int, extra ...string) []string {
	t.Helper()
	dirs := make([]string, n)
	for i := range dirs {
		dirs[i] = filepath.Join(root, fmt.Sprintf("part-%d-of-%d", i, n))
		args := append([]string{"generate", "--count", "50", "--quiet", "--shard", fmt.Sprintf("%d/%d", i, n), "--out", dirs[i]}, extra...)
		wantCode(t, exitOK, args...)
	}
	return dirs
}

// Shards merged are the single-machine dataset, byte for byte, whatever the
// shard layout (the design's reproducibility contract).
func TestShardMergeEqualsSingleRun(t *testing.T) {
	root := t.TempDir()
	single := filepath.Join(root, "single")
	wantCode(t, exitOK, "generate", "--count", "50", "--quiet", "--out", single)
	for _, n := range []int{1, 3, 7} {
		t.Run(fmt.Sprintf("N=%d", n), func(t *testing.T) {
			dirs := genShards(t, t.TempDir(), n)
			merged := filepath.Join(t.TempDir(), "merged")
			wantCode(t, exitOK, append(append([]string{"merge"}, dirs...), "--out", merged, "--quiet")...)
			sameTree(t, single, merged)
			wantCode(t, exitOK, "verify", merged)
		})
	}
}

func TestMergeRefusals(t *testing.T) {
	root := t.TempDir()
	dirs := genShards(t, filepath.Join(root, "seed1"), 3)
	other := genShards(t, filepath.Join(root, "seed2"), 3, "--seed", "2")
	cases := []struct {
		name   string
		dirs   []string
		phrase string
	}{
		{"one shard missing", []string{dirs[0], dirs[2]}, "shards [1] of 3 are missing"},
		{"one shard twice", []string{dirs[0], dirs[1], dirs[1], dirs[2]}, "shard 1/3 is given twice"},
		{"shard from another seed", []string{dirs[0], other[1], dirs[2]}, "seed 2 differs"},
		{"not a shard folder", []string{dirs[0], dirs[1], root}, "not a finished shard"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "merged")
			code, _, stderr := runCLI(t, append(append([]string{"merge"}, c.dirs...), "--out", out)...)
			if code == exitOK {
				t.Fatalf("merge succeeded")
			}
			if !strings.Contains(stderr, c.phrase) {
				t.Errorf("stderr %q does not say %q", stderr, c.phrase)
			}
			if _, err := os.Stat(filepath.Join(out, "dataset.json")); err == nil {
				t.Errorf("a refused merge wrote %s/dataset.json", out)
			}
		})
	}
}

// fakeEnv is a getenv over a fixed map.
func fakeEnv(kv ...string) func(string) string {
	m := map[string]string{}
	for i := 0; i+1 < len(kv); i += 2 {
		m[kv[i]] = kv[i+1]
	}
	return func(k string) string { return m[k] }
}

// Variable names: Kubernetes Indexed Jobs set JOB_COMPLETION_INDEX, 0-based
// (Kubernetes documentation, "Jobs: completion mode Indexed"); Slurm job
// arrays set SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT and
// SLURM_ARRAY_TASK_MIN (Slurm sbatch(1), OUTPUT ENVIRONMENT VARIABLES).
func TestShardFromFlagsOrEnv(t *testing.T) {
	type shardCase struct {
		name         string
		flag         string
		shards       int
		env          []string
		shard, count int
		from         string // a phrase of the returned source note
	}
	ok := []shardCase{
		{"no shard", "", 0, nil, 0, 0, ""},
		{"explicit", "2/7", 0, nil, 2, 7, ""},
		{"explicit 0/1", "0/1", 0, nil, 0, 1, ""},
		{"explicit wins over the environment", "1/3", 0, []string{"JOB_COMPLETION_INDEX", "4", "SLURM_ARRAY_TASK_ID", "5", "SLURM_ARRAY_TASK_COUNT", "9"}, 1, 3, ""},
		{"kubernetes", "", 5, []string{"JOB_COMPLETION_INDEX", "4"}, 4, 5, "JOB_COMPLETION_INDEX"},
		{"kubernetes index 0", "", 5, []string{"JOB_COMPLETION_INDEX", "0"}, 0, 5, "JOB_COMPLETION_INDEX"},
		{"kubernetes before slurm", "", 2, []string{"JOB_COMPLETION_INDEX", "1", "SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "4"}, 1, 2, "JOB_COMPLETION_INDEX"},
		{"slurm from 0", "", 0, []string{"SLURM_ARRAY_TASK_ID", "3", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "0"}, 3, 4, "SLURM_ARRAY_TASK_ID"},
		{"slurm without MIN", "", 0, []string{"SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "2"}, 0, 2, "SLURM"},
	}
	// --array=1-N: IDs 1..N are shards 0..N-1.
	for id := 1; id <= 4; id++ {
		ok = append(ok, shardCase{fmt.Sprintf("slurm MIN=1 ID=%d", id), "", 0, []string{"SLURM_ARRAY_TASK_ID", fmt.Sprint(id), "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1"}, id - 1, 4, "SLURM"})
	}
	for _, c := range ok {
		t.Run(c.name, func(t *testing.T) {
			shard, shards, from, err := shardFromFlagsOrEnv(c.flag, c.shards, fakeEnv(c.env...))
			if err != nil {
				t.Fatal(err)
			}
			if shard != c.shard || shards != c.count {
				t.Errorf("got %d/%d, want %d/%d", shard, shards, c.shard, c.count)
			}
			if !strings.Contains(from, c.from) || (c.from == "" && from != "") {
				t.Errorf("from = %q, want it to name %q", from, c.from)
			}
		})
	}
	bad := []struct {
		name   string
		flag   string
		shards int
		env    []string
	}{
		{"index equals count", "7/7", 0, nil},
		{"negative index", "-1/3", 0, nil},
		{"zero shards", "0/0", 0, nil},
		{"not numbers", "a/b", 0, nil},
		{"no slash", "3", 0, nil},
		{"trailing junk", "1/3x", 0, nil},
		{"leading zero", "01/3", 0, nil},
		{"kubernetes without --shards", "", 0, []string{"JOB_COMPLETION_INDEX", "2"}},
		{"kubernetes index beyond --shards", "", 3, []string{"JOB_COMPLETION_INDEX", "3"}},
		{"kubernetes index not a number", "", 3, []string{"JOB_COMPLETION_INDEX", "x"}},
		{"kubernetes index negative", "", 3, []string{"JOB_COMPLETION_INDEX", "-1"}},
		{"slurm without COUNT", "", 0, []string{"SLURM_ARRAY_TASK_ID", "1"}},
		{"slurm COUNT 0", "", 0, []string{"SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "0"}},
		{"slurm ID not a number", "", 0, []string{"SLURM_ARRAY_TASK_ID", "one", "SLURM_ARRAY_TASK_COUNT", "3"}},
		{"slurm MIN not a number", "", 0, []string{"SLURM_ARRAY_TASK_ID", "1", "SLURM_ARRAY_TASK_COUNT", "3", "SLURM_ARRAY_TASK_MIN", "?"}},
		{"slurm ID below MIN", "", 0, []string{"SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "3", "SLURM_ARRAY_TASK_MIN", "1"}},
		{"slurm ID past the array", "", 0, []string{"SLURM_ARRAY_TASK_ID", "4", "SLURM_ARRAY_TASK_COUNT", "3", "SLURM_ARRAY_TASK_MIN", "1"}},
		{"--shards without an index", "", 4, nil},
	}
	for _, c := range bad {
		t.Run("refused: "+c.name, func(t *testing.T) {
			_, _, _, err := shardFromFlagsOrEnv(c.flag, c.shards, fakeEnv(c.env...))
			if err == nil {
				t.Fatal("accepted")
			}
			if code := exitCode(err); code != exitUsage {
				t.Errorf("exit code %d for %v, want %d (usage)", code, err, exitUsage)
			}
		})
	}
}
