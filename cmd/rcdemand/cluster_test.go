package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"gopkg.in/yaml.v3"
)

// studyFolder estimates a plain logit on the synthetic-small data in a new
// folder (fast to re-estimate many times) and returns the folder.
func studyFolder(t *testing.T, bin string) string {
	t.Helper()
	dir := t.TempDir()
	for _, f := range []string{"products.csv"} {
		raw, err := os.ReadFile(filepath.Join("../../testdata/synthetic-small", f))
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(dir, f), raw, 0o644)
	}
	os.WriteFile(filepath.Join(dir, "spec.toml"), []byte(`[data]
products = "products.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
[instruments]
excluded = ["z_cost", "z_rival_x1", "z_rival_x2"]
`), 0o644)
	if code, _, errs := runBinary(t, bin, dir, "estimate", "spec.toml", "--out", "results.json", "--quiet"); code != 0 {
		t.Fatalf("estimate: exit %d: %s", code, errs)
	}
	return dir
}

// withoutTiming blanks the timing fields of a study file (timing, from
// binary_test.go).
func withoutTiming(t *testing.T, path string) string {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return timing.ReplaceAllString(string(raw), `"seconds": 0`)
}

// TestShardedStudy: shards 0/3, 1/3 and 2/3 run as separate processes and
// gathered equal one run with the same seed byte for byte, timing fields
// aside; a missing or duplicated shard is an error naming it.
func TestShardedStudy(t *testing.T) {
	bin := sharedBinary(t)
	dir := studyFolder(t, bin)
	if code, _, errs := runBinary(t, bin, dir, "study", "results.json", "--replications", "7", "--out", "single.json", "--quiet"); code != 0 {
		t.Fatalf("study: exit %d: %s", code, errs)
	}
	var shards []string
	for _, k := range []string{"0", "1", "2"} {
		out := "study-" + k + ".json"
		if code, _, errs := runBinary(t, bin, dir, "study", "results.json", "--replications", "7", "--shard", k+"/3", "--out", out, "--quiet"); code != 0 {
			t.Fatalf("shard %s: exit %d: %s", k, code, errs)
		}
		shards = append(shards, out)
	}
	args := append([]string{"gather"}, shards...)
	code, out, errs := runBinary(t, bin, dir, append(args, "--out", "gathered.json", "--quiet")...)
	if code != 0 {
		t.Fatalf("gather: exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "Trust study · 7 replications") { // --quiet silences bars and notes, not results
		t.Errorf("gather --quiet printed no study table:\n%s", out)
	}
	if a, b := withoutTiming(t, filepath.Join(dir, "single.json")), withoutTiming(t, filepath.Join(dir, "gathered.json")); a != b {
		t.Fatalf("the gathered study differs from the single run:\n%s\n---\n%s", a[:min(len(a), 2000)], b[:min(len(b), 2000)])
	}
	for _, tc := range []struct {
		files []string
		want  string
	}{
		{shards[:2], "shard 2/3 is missing"},
		{[]string{shards[0], shards[1], shards[1]}, "shard 1/3 appears twice"},
	} {
		code, _, errs := runBinary(t, bin, dir, append(append([]string{"gather"}, tc.files...), "--out", "bad.json")...)
		if code != 1 || !strings.Contains(errs, tc.want) {
			t.Errorf("gather %v: exit %d, stderr %q; want 1 and %q", tc.files, code, errs, tc.want)
		}
	}
}

// TestClusterExamples checks the Slurm scripts (bash -n) and the Kubernetes
// manifests (parsed as YAML), then runs their command lines on this machine
// for a two-shard study: the gathered study must equal a single run.
func TestClusterExamples(t *testing.T) {
	bin := sharedBinary(t)
	binDir := filepath.Dir(bin)
	path := binDir + string(os.PathListSeparator) + os.Getenv("PATH")
	slurm, _ := filepath.Abs("../../examples/cluster/slurm")
	kube, _ := filepath.Abs("../../examples/cluster/kubernetes")
	for _, f := range []string{"study.sbatch", "gather.sbatch", "submit.sh"} {
		if out, err := exec.Command("bash", "-n", filepath.Join(slurm, f)).CombinedOutput(); err != nil {
			t.Fatalf("bash -n %s: %v\n%s", f, err, out)
		}
	}
	sbatch, _ := os.ReadFile(filepath.Join(slurm, "study.sbatch"))
	if !strings.Contains(string(sbatch), "#SBATCH --array=0-") || !strings.Contains(string(sbatch), "SLURM_ARRAY_TASK_ID") {
		t.Error("study.sbatch is not a job array taking its shard from SLURM_ARRAY_TASK_ID")
	}
	dir := studyFolder(t, bin)
	if code, _, errs := runBinary(t, bin, dir, "study", "results.json", "--replications", "6", "--out", "single.json", "--quiet"); code != 0 {
		t.Fatalf("study: exit %d: %s", code, errs)
	}
	run := func(env []string, name string, args ...string) {
		t.Helper()
		cmd := exec.Command(name, args...)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), append([]string{"PATH=" + path}, env...)...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s %v: %v\n%s", name, args, err, out)
		}
	}
	// Slurm: the array tasks and the gather step, as sbatch would run them.
	for _, k := range []string{"0", "1"} {
		run([]string{"SLURM_ARRAY_TASK_ID=" + k, "SHARDS=2", "REPLICATIONS=6"}, "bash", filepath.Join(slurm, "study.sbatch"))
	}
	run([]string{"SHARDS=2"}, "bash", filepath.Join(slurm, "gather.sbatch"))
	if a, b := withoutTiming(t, filepath.Join(dir, "single.json")), withoutTiming(t, filepath.Join(dir, "study.json")); a != b {
		t.Fatal("the Slurm example's study differs from a single run")
	}
	// Kubernetes: the Indexed Job's pods, then the gather Job.
	study := kubeJob(t, filepath.Join(kube, "study-job.yaml"))
	if study.Spec.CompletionMode != "Indexed" || !strings.Contains(study.script(), "JOB_COMPLETION_INDEX") {
		t.Fatal("study-job.yaml is not an Indexed Job taking its shard from JOB_COMPLETION_INDEX")
	}
	os.Remove(filepath.Join(dir, "study.json"))
	for _, k := range []string{"0", "1"} {
		run(append(study.env(), "JOB_COMPLETION_INDEX="+k, "SHARDS=2", "REPLICATIONS=6"), "sh", "-c", study.script())
	}
	gather := kubeJob(t, filepath.Join(kube, "gather-job.yaml"))
	run(append(gather.env(), "SHARDS=2"), "sh", "-c", gather.script())
	if a, b := withoutTiming(t, filepath.Join(dir, "single.json")), withoutTiming(t, filepath.Join(dir, "study.json")); a != b {
		t.Fatal("the Kubernetes example's study differs from a single run")
	}
}

// job is the part of a Kubernetes Job manifest the test reads.
type job struct {
	Kind string `yaml:"kind"`
	Spec struct {
		CompletionMode string `yaml:"completionMode"`
		Completions    int    `yaml:"completions"`
		Template       struct {
			Spec struct {
				Containers []struct {
					Command []string `yaml:"command"`
					Args    []string `yaml:"args"`
					Env     []struct {
						Name  string `yaml:"name"`
						Value string `yaml:"value"`
					} `yaml:"env"`
				} `yaml:"containers"`
			} `yaml:"spec"`
		} `yaml:"template"`
	} `yaml:"spec"`
}

func kubeJob(t *testing.T, path string) *job {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var j job
	dec := yaml.NewDecoder(bytes.NewReader(raw))
	dec.KnownFields(false)
	if err := dec.Decode(&j); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	c := j.Spec.Template.Spec.Containers
	if j.Kind != "Job" || len(c) != 1 || len(c[0].Command) != 2 || c[0].Command[0] != "sh" || len(c[0].Args) != 1 {
		t.Fatalf("%s: want a Job with one container running sh -c ARG", path)
	}
	return &j
}

func (j *job) script() string { return j.Spec.Template.Spec.Containers[0].Args[0] }

func (j *job) env() []string {
	var out []string
	for _, e := range j.Spec.Template.Spec.Containers[0].Env {
		out = append(out, e.Name+"="+e.Value)
	}
	return out
}

// TestShardedMergerDraws: merger --draws split into shards and gathered
// equals one run with the same seed byte for byte; a missing shard is named.
func TestShardedMergerDraws(t *testing.T) {
	bin := sharedBinary(t)
	dir := studyFolder(t, bin)
	base := []string{"merger", "results.json", "--combine", "1,2", "--draws", "100", "--quiet"}
	if code, _, errs := runBinary(t, bin, dir, append(base, "--out", "single.json")...); code != 0 {
		t.Fatalf("merger: exit %d: %s", code, errs)
	}
	for _, k := range []string{"0", "1"} {
		if code, _, errs := runBinary(t, bin, dir, append(base, "--shard", k+"/2", "--out", "draws-"+k+".json")...); code != 0 {
			t.Fatalf("shard %s: exit %d: %s", k, code, errs)
		}
	}
	code, out, errs := runBinary(t, bin, dir, "gather", "draws-0.json", "draws-1.json", "--out", "gathered.json", "--quiet")
	if code != 0 {
		t.Fatalf("gather: exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "Merger of 1 + 2") || !strings.Contains(out, "100 of 100 draws kept") {
		t.Errorf("gather --quiet printed no merger results:\n%s", out)
	}
	// Every interval of the draws' summary is printed, under its label.
	var rec struct {
		Draws struct {
			Summary map[string]json.RawMessage `json:"summary"`
		} `json:"draws"`
	}
	raw, _ := os.ReadFile(filepath.Join(dir, "gathered.json"))
	if err := json.Unmarshal(raw, &rec); err != nil || len(rec.Draws.Summary) == 0 {
		t.Fatalf("gathered.json: %v, summary %v", err, rec.Draws.Summary)
	}
	for key := range rec.Draws.Summary {
		label := ""
		for _, g := range drawGroups {
			for _, r := range g.rows {
				if r.key == key {
					label = r.label
				}
			}
		}
		if label == "" || !strings.Contains(out, label) {
			t.Errorf("summary interval %q: label %q not printed", key, label)
		}
	}
	a, _ := os.ReadFile(filepath.Join(dir, "single.json"))
	b, _ := os.ReadFile(filepath.Join(dir, "gathered.json"))
	if !bytes.Equal(a, b) {
		t.Fatal("the gathered merger draws differ from the single run")
	}
	if code, _, errs := runBinary(t, bin, dir, "gather", "draws-1.json", "--out", "bad.json"); code != 1 || !strings.Contains(errs, "shard 0/2 is missing") {
		t.Errorf("gather with a missing shard: exit %d, stderr %q", code, errs)
	}
}
