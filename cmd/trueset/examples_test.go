package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"
)

// buildBinary compiles trueset once for tests that run scripts.
func buildBinary(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "trueset")
	cmd := exec.Command("go", "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// The Slurm scripts run as Slurm would run them: bash with the array
// variables set (SLURM_ARRAY_TASK_ID, _COUNT, _MIN are the names Slurm's
// sbatch documentation gives). An array of 1-3 is rendered and merged, and
// must equal a single run.
func TestSlurmExampleScripts(t *testing.T) {
	if _, err := exec.LookPath("bash"); err != nil {
		t.Fatal("bash is needed to run the example scripts")
	}
	bin := buildBinary(t)
	work := t.TempDir()
	path := filepath.Dir(bin) + string(os.PathListSeparator) + os.Getenv("PATH")
	script := func(name string, env ...string) {
		t.Helper()
		abs, _ := filepath.Abs(filepath.Join("..", "..", "examples", "slurm", name))
		cmd := exec.Command("bash", abs)
		cmd.Dir = work
		cmd.Env = append(os.Environ(), append([]string{"PATH=" + path, "PRESET=tabletop-dice", "COUNT=30", "SEED=3"}, env...)...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s %v: %v\n%s", name, env, err, out)
		}
	}
	for id := 1; id <= 3; id++ {
		script("generate-array.sh", "SLURM_ARRAY_TASK_ID="+string(rune('0'+id)), "SLURM_ARRAY_TASK_COUNT=3", "SLURM_ARRAY_TASK_MIN=1", "SLURM_CPUS_PER_TASK=2")
	}
	script("merge.sh")
	single := filepath.Join(work, "single")
	var out, errb bytes.Buffer
	if code := run([]string{"generate", "--preset", "tabletop-dice", "--count", "30", "--seed", "3", "--quiet", "--out", single}, &out, &errb); code != 0 {
		t.Fatalf("single run: %s", errb.String())
	}
	if diff, err := firstDifference(single, filepath.Join(work, "dataset")); err != nil || diff != "" {
		t.Fatalf("merged Slurm shards differ from a single run at %q (%v)", diff, err)
	}
}

// The Kubernetes example is an Indexed Job (batch/v1 completionMode Indexed)
// whose --shards equals its completions, as the shard arithmetic requires.
func TestKubernetesExample(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "examples", "kubernetes", "indexed-job.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	var job struct {
		APIVersion string `yaml:"apiVersion"`
		Kind       string `yaml:"kind"`
		Spec       struct {
			CompletionMode string `yaml:"completionMode"`
			Completions    int    `yaml:"completions"`
			Template       struct {
				Spec struct {
					Containers []struct {
						Args []string `yaml:"args"`
					} `yaml:"containers"`
				} `yaml:"spec"`
			} `yaml:"template"`
		} `yaml:"spec"`
	}
	if err := yaml.Unmarshal(b, &job); err != nil {
		t.Fatal(err)
	}
	if job.APIVersion != "batch/v1" || job.Kind != "Job" || job.Spec.CompletionMode != "Indexed" {
		t.Fatalf("not an Indexed Job: %+v", job)
	}
	args := strings.Join(job.Spec.Template.Spec.Containers[0].Args, " ")
	want := "--shards " + itoa(job.Spec.Completions)
	if !strings.Contains(args, want) || !strings.Contains(args, "JOB_COMPLETION_INDEX") {
		t.Fatalf("args %q lack %q or the completion index", args, want)
	}
}

func itoa(n int) string { return strconv.Itoa(n) }
