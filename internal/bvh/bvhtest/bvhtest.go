// Package bvhtest gives tests across the repository the CMU golf swings of
// /work/shared/data/cmu-golf (see its README.md) as parsed BVH files or as
// kinchain captures.
//
// The data directory is $KINCHAIN_SHARED_DATA/cmu-golf when the variable is
// set, else ../shared/data/cmu-golf relative to the repository root. When it
// is absent the calling test is skipped, unless the environment variable CI
// is "true", in which case it fails.
package bvhtest

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
	"github.com/kinchain/kinchain/internal/bvh"
)

// Trials are the two CMU golf swings, subject 64, trials 08 and 09.
var Trials = []string{"64_08", "64_09"}

// sha256sums are the checksums published in the dataset's README.md.
var sha256sums = map[string]string{
	"64_08": "b8cce83ebf892538eb2eb8c445eef2d90b0aceb8a3d3ed5e402604e1731b104a",
	"64_09": "6ee283f5ef4a3d5d59fc347795456ee142126c232e7bc9ae8163db3d2b66d988",
}

// Dir returns the directory holding the CMU golf files, skipping or failing
// the test as described in the package comment when it is absent.
func Dir(t testing.TB) string {
	t.Helper()
	root := os.Getenv("KINCHAIN_SHARED_DATA")
	if root == "" {
		_, file, _, _ := runtime.Caller(0)
		// internal/bvh/bvhtest/<file> → repository root → ../shared/data
		root = filepath.Join(filepath.Dir(file), "..", "..", "..", "..", "shared", "data")
	}
	dir := filepath.Join(root, "cmu-golf")
	if _, err := os.Stat(dir); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("shared data %s missing in CI: %v", dir, err)
		}
		t.Skipf("shared data %s absent: %v", dir, err)
	}
	return dir
}

// File reads and parses trial ("64_08" or "64_09"), failing the test when
// the file's checksum differs from the one the dataset's README publishes.
func File(t testing.TB, trial string) *bvh.File {
	t.Helper()
	want, ok := sha256sums[trial]
	if !ok {
		t.Fatalf("bvhtest: unknown trial %q (have %v)", trial, Trials)
	}
	path := filepath.Join(Dir(t), trial+".bvh")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("bvhtest: %v", err)
	}
	sum := sha256.Sum256(data)
	if got := hex.EncodeToString(sum[:]); got != want {
		t.Fatalf("bvhtest: %s has sha256 %s, README says %s", path, got, want)
	}
	f, err := bvh.Parse(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("bvhtest: %s: %v", path, err)
	}
	return f
}

// Capture returns trial converted with bvh.ToCapture: the CMU joints
// (bvh.CMUJoints), a right-handed subject, motion frames 1 to the end (frame
// 0 is the T-pose reference), capture id "cmu-" + trial, no positions.
func Capture(t testing.TB, trial string) *kinchainv1.Capture {
	t.Helper()
	c, err := bvh.ToCapture(File(t, trial), bvh.Options{
		CaptureID:  "cmu-" + trial,
		Handedness: kinchainv1.Handedness_HANDEDNESS_RIGHT,
		FirstFrame: 1,
	})
	if err != nil {
		t.Fatalf("bvhtest: %s: %v", trial, err)
	}
	return c
}
