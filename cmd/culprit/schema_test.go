package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

// schemaDir holds the JSON Schemas (draft 2020-12) of culprit's documents.
var schemaDir = filepath.Join("..", "..", "testdata", "schema")

// compileSchemas compiles every schema of schemaDir with an independent
// validator (santhosh-tekuri/jsonschema, which passes the official JSON
// Schema test suite), keyed by the document's "schema" tag.
func compileSchemas(t *testing.T) map[string]*jsonschema.Schema {
	t.Helper()
	c := jsonschema.NewCompiler()
	files, err := filepath.Glob(filepath.Join(schemaDir, "*.schema.json"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no schemas in %s: %v", schemaDir, err)
	}
	for _, f := range files {
		fh, err := os.Open(f)
		if err != nil {
			t.Fatal(err)
		}
		doc, err := jsonschema.UnmarshalJSON(fh)
		fh.Close()
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		id := doc.(map[string]any)["$id"].(string)
		if err := c.AddResource(id, doc); err != nil {
			t.Fatalf("%s: %v", f, err)
		}
	}
	out := map[string]*jsonschema.Schema{}
	for tag, name := range map[string]string{"culprit.rank/v1": "rank", "culprit.diff/v1": "diff",
		"culprit.explain/v1": "explain", "culprit.snapshot/v1": "snapshot", "culprit.latency/v1": "latency"} {
		s, err := c.Compile("https://culprit.invalid/schema/" + name + ".schema.json")
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		out[tag] = s
	}
	return out
}

// validateDocument validates a JSON document against the schema its
// "schema" tag names.
func validateDocument(t *testing.T, schemas map[string]*jsonschema.Schema, name, data string) {
	t.Helper()
	inst, err := jsonschema.UnmarshalJSON(strings.NewReader(data))
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	obj, _ := inst.(map[string]any)
	tag, _ := obj["schema"].(string)
	s := schemas[tag]
	if s == nil {
		t.Fatalf("%s: no schema for %q", name, tag)
	}
	if err := s.Validate(inst); err != nil {
		t.Errorf("%s does not match its schema %s: %v", name, tag, err)
	}
}

// TestGoldenOutputsMatchSchemas validates every JSON golden output, a
// snapshot, an explanation and a comparison with calls against the JSON
// Schemas, and checks that the schemas reject a renamed field.
func TestGoldenOutputsMatchSchemas(t *testing.T) {
	schemas := compileSchemas(t)
	var files []string
	for _, pattern := range []string{"../../testdata/golden/*.json", "../../report/testdata/*.json"} {
		m, err := filepath.Glob(pattern)
		if err != nil {
			t.Fatal(err)
		}
		files = append(files, m...)
	}
	if len(files) < 4 {
		t.Fatalf("only %d golden JSON files found", len(files))
	}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		validateDocument(t, schemas, f, string(data))
	}

	dir := demoFiles(t)
	snap := filepath.Join(t.TempDir(), "v42.snapshot.json")
	traces := filepath.Join(dir, "greenhouse-v42.traces.jsonl.gz")
	if code, _, errOut := runTest(t, "", "rank", "--save", snap, "--format", "json", traces); code != exitOK {
		t.Fatalf("rank --save: %s", errOut)
	}
	data, err := os.ReadFile(snap)
	if err != nil {
		t.Fatal(err)
	}
	validateDocument(t, schemas, "snapshot", string(data))
	for _, args := range [][]string{
		{"explain", "--format", "json", "VarietyByID", traces},
		{"explain", "--format", "json", "Build", filepath.Join(dir, "greenhouse-v42.goroutine.1.pb.gz")},
		{"diff", "--format", "json", "--limit", "3", "--base", filepath.Join(dir, "greenhouse-v41.traces.jsonl.gz"), "--candidate", traces},
		{"rank", "--format", "json", "--limit", "2", traces},
		{"latency", "--format", "json", traces},
		{"latency", "--format", "json", "--limit", "1", traces},
	} {
		code, out, errOut := runTest(t, "", args...)
		if code != exitOK {
			t.Fatalf("%v: exit %d: %s", args, code, errOut)
		}
		validateDocument(t, schemas, strings.Join(args[:3], " "), out)
	}

	// The schemas are strict: a renamed key fails.
	_, out, _ := runTest(t, "", "rank", "--format", "json", traces)
	var doc map[string]any
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	doc["rootCause"] = doc["rootCauses"]
	delete(doc, "rootCauses")
	renamed, _ := json.Marshal(doc)
	inst, _ := jsonschema.UnmarshalJSON(strings.NewReader(string(renamed)))
	if schemas["culprit.rank/v1"].Validate(inst) == nil {
		t.Error("the rank schema accepts a document with a renamed key")
	}
}
