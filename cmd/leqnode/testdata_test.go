package main

import "path/filepath"

// sharedTestdata returns the path of a file in the project's top-level testdata/, which holds
// the inputs tests of several packages share (testdata/README.md says how each was made).
func sharedTestdata(parts ...string) string {
	return filepath.Join(append([]string{"..", "..", "testdata"}, parts...)...)
}
