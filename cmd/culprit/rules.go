package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/culprithq/culprit/attribute"
	"github.com/spf13/cobra"
)

// rulesOptions holds the flags and dependencies of `culprit rules`.
type rulesOptions struct {
	streams  *streams
	analysis analysisFlags
	format   string
	inputs   []string
}

func newRulesCmd(s *streams, runF func(context.Context, *rulesOptions) error) *cobra.Command {
	opts := &rulesOptions{streams: s}
	cmd := &cobra.Command{
		Use:   "rules [INPUT...]",
		Short: "Show the classification rules and what is taken as application code",
		Long: `Rules prints the effective classification rules, user rules first (they win),
then the built-in table. Given inputs, it also says which code it takes as the
application's, and why, so that --app can be set when detection is wrong.`,
		Example: `  culprit rules
  culprit rules --rules team-rules.json profiles/
  culprit rules --format json`,
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.inputs = args
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runRules(cmd.Context(), opts)
		},
	}
	opts.analysis.register(cmd)
	cmd.Flags().StringVar(&opts.format, "format", "text", "output format: text or json")
	return cmd
}

type rulesDoc struct {
	Schema   string                `json:"schema"`
	App      []string              `json:"app,omitempty"`
	Files    []string              `json:"rulesFiles,omitempty"`
	Rules    []attribute.Rule      `json:"rules"`
	Detected []attribute.Detection `json:"detected,omitempty"`
}

func runRules(ctx context.Context, opts *rulesOptions) error {
	if opts.format != "text" && opts.format != "json" {
		return usagef("--format must be one of: text, json")
	}
	rules, err := opts.analysis.rules()
	if err != nil {
		return err
	}
	doc := rulesDoc{Schema: "culprit.rules/v1", App: rules.App, Files: rules.Files, Rules: rules.Rules}
	if len(opts.inputs) > 0 {
		src, err := opts.analysis.load(ctx, opts.streams, opts.inputs)
		if err != nil {
			return err
		}
		doc.Detected = attribute.NewClassifier(src, rules).Detected
	}
	w := opts.streams.Out
	if opts.format == "json" {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(doc)
	}
	return writeRulesText(w, doc, len(opts.inputs) > 0)
}

func writeRulesText(w io.Writer, doc rulesDoc, haveInputs bool) error {
	if len(doc.Files) > 0 {
		fmt.Fprintf(w, "rules files: %v\n", doc.Files)
	}
	if len(doc.App) > 0 {
		fmt.Fprintf(w, "application prefixes: %v\n", doc.App)
	} else {
		fmt.Fprintln(w, "application code: auto-detected (no --app and no app prefixes in rules files)")
	}
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "#\tFAMILY\tCLASS\tMATCH\tPATTERN\tSYSTEM")
	for i := range doc.Rules {
		r := &doc.Rules[i]
		kind, pattern := r.Pattern()
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\n", i+1, r.Family, r.Class, kind, pattern, r.System)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if haveInputs {
		fmt.Fprintln(w)
		if len(doc.Detected) == 0 {
			fmt.Fprintln(w, "detected application code: none (or given with --app)")
		} else {
			fmt.Fprintln(w, "detected application code:")
			for _, d := range doc.Detected {
				fmt.Fprintf(w, "  %s: %d functions (%s)\n", d.Prefix, d.Functions, d.Reason)
			}
		}
	}
	return nil
}
