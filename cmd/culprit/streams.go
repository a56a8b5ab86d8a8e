package main

import (
	"io"
	"os"

	"golang.org/x/term"
)

// streams are the I/O streams a command may use. Commands write only here.
type streams struct {
	In            io.Reader
	Out, Err      io.Writer
	OutIsTerminal bool
	ErrIsTerminal bool
	// Width is the terminal width of Out, 0 when unknown.
	Width int
	// Getenv reads the environment (NO_COLOR).
	Getenv func(string) string
}

func systemStreams() *streams {
	s := &streams{In: os.Stdin, Out: os.Stdout, Err: os.Stderr, Getenv: os.Getenv}
	if term.IsTerminal(int(os.Stdout.Fd())) {
		s.OutIsTerminal = true
		if w, _, err := term.GetSize(int(os.Stdout.Fd())); err == nil {
			s.Width = w
		}
	}
	s.ErrIsTerminal = term.IsTerminal(int(os.Stderr.Fd()))
	return s
}
