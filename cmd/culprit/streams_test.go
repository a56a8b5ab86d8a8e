package main

import "bytes"

// testStreams returns streams backed by buffers, for tests.
func testStreams(in string) (*streams, *bytes.Buffer, *bytes.Buffer) {
	var out, errb bytes.Buffer
	return &streams{
		In:     bytes.NewBufferString(in),
		Out:    &out,
		Err:    &errb,
		Getenv: func(string) string { return "" },
	}, &out, &errb
}
