package main

import (
	"fmt"
	"runtime"

	"github.com/spf13/cobra"
)

func newVersionCmd(s *streams) *cobra.Command {
	return &cobra.Command{
		Use:     "version",
		Short:   "Print culprit's version",
		Example: "  culprit version",
		Args:    exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := fmt.Fprintf(s.Out, "culprit %s (%s, %s/%s)\n", version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
			return err
		},
	}
}
