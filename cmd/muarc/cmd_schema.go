package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"muarc/schema"
)

func init() {
	var layout, asJSON bool
	cmd := &cobra.Command{
		Use:   "schema [--layout]",
		Short: "Print the JSON Schema of the metadata view, or the layout specification",
		Long: `schema prints the JSON Schema (draft-07) that a recording's metadata view
and a metadata sidecar must satisfy; with --layout it prints the layout
specification (LAYOUT.md) instead. Both are built into the binary.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			out := cmd.OutOrStdout()
			switch {
			case layout && asJSON:
				return printJSON(out, map[string]string{"layout_version": schema.LayoutVersion, "layout": schema.Layout})
			case layout:
				_, err := fmt.Fprint(out, schema.Layout)
				return err
			case asJSON:
				var v any
				if err := json.Unmarshal([]byte(schema.RecordingSchema), &v); err != nil {
					return err
				}
				return printJSON(out, v)
			}
			_, err := fmt.Fprint(out, schema.RecordingSchema)
			return err
		},
	}
	cmd.Flags().BoolVar(&layout, "layout", false, "print the layout specification (Markdown) instead of the JSON Schema")
	cmd.Flags().BoolVar(&asJSON, "json", false, "machine output: the schema re-indented, or the layout wrapped in a JSON object")
	rootCmd.AddCommand(cmd)
}
