package main

import (
	"bytes"
	"strings"
	"testing"
)

func TestRunPrintsFiniteTable(t *testing.T) {
	var buf bytes.Buffer
	if err := run(&buf, "PR78", 300, 7e6); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, id := range demoIDs {
		if !strings.Contains(out, id) {
			t.Errorf("output lacks %s", id)
		}
	}
	for _, bad := range []string{"NaN", "Inf"} {
		if strings.Contains(out, bad) {
			t.Errorf("output contains %s:\n%s", bad, out)
		}
	}
	if !strings.Contains(out, "licensed engineer") {
		t.Error("output lacks the safety caution")
	}
}

func TestRunRejectsBadInput(t *testing.T) {
	var buf bytes.Buffer
	if err := run(&buf, "PR99", 300, 7e6); err == nil {
		t.Error("unknown model accepted")
	}
	if err := run(&buf, "SRK", -5, 7e6); err == nil || !strings.Contains(err.Error(), "T") {
		t.Errorf("negative temperature: %v", err)
	}
}
