package main

import (
	"fmt"
	"io"
)

// printer writes a command's output and keeps the first write error, so that a command prints
// freely and returns p.err at the end: a full disk or a closed pipe is a failure (exit status
// 1), never a silently cut output.
type printer struct {
	w   io.Writer
	err error
}

func (p *printer) printf(format string, a ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintf(p.w, format, a...)
	}
}

func (p *printer) println(a ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintln(p.w, a...)
	}
}

// say writes a message, a warning or usage to standard error. A failure to write there is
// dropped: standard error is the last place a command can report to.
func say(w io.Writer, format string, a ...any) {
	_, _ = fmt.Fprintf(w, format, a...)
}
